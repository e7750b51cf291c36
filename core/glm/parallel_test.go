package glm

import (
	"math"
	"math/rand/v2"
	"runtime"
	"testing"
)

// TestFitSameOnAnyWorkerCount: Fit splits the voxels over goroutines; every voxel's result
// depends on its own sums only, so one goroutine and several give bit-identical maps.
// (The per-voxel arithmetic itself is checked against the naive two-pass fit in
// naive_test.go.)
func TestFitSameOnAnyWorkerCount(t *testing.T) {
	dims := [3]int{32, 32, 20} // 20 480 voxels: above parallelChunk, so Fit splits
	const n = 30
	r := rand.New(rand.NewPCG(5, 6))
	x := synthDesign(n, true, r)
	var voxels []int32
	for i := 0; i < dims[0]*dims[1]*dims[2]; i++ {
		if i%11 != 4 {
			voxels = append(voxels, int32(i))
		}
	}
	if maxWorkers(len(voxels)) < 2 && runtime.NumCPU() > 1 {
		t.Fatalf("%d voxels: maxWorkers %d, want a split", len(voxels), maxWorkers(len(voxels)))
	}
	vols := make([][]float32, n)
	for tt := range vols {
		vols[tt] = make([]float32, dims[0]*dims[1]*dims[2])
		for i := range vols[tt] {
			vols[tt][i] = float32(1000 + 3*r.NormFloat64() + 2*x.At(tt, 1))
			if i%97 == 0 {
				vols[tt][i] = 500 // constant voxels: excluded
			}
		}
	}
	c := make([]float64, x.RawMatrix().Cols)
	c[1] = 1
	c2 := make([]float64, len(c))
	c2[2] = 1
	opt := Options{VoxelMM: [3]float64{3, 3, 3}, Contrasts: [][][]float64{{c}, {c, c2}}}
	fitWith := func(procs int) *Fit {
		old := runtime.GOMAXPROCS(procs)
		defer runtime.GOMAXPROCS(old)
		a := NewAccumulator(x, dims, voxels)
		for _, v := range vols {
			a.AddVolume(v)
		}
		f, err := a.Fit(opt)
		if err != nil {
			t.Fatal(err)
		}
		return f
	}
	one, many := fitWith(1), fitWith(4)
	same := func(name string, a, b []float64) {
		t.Helper()
		for v := range a {
			if math.Float64bits(a[v]) != math.Float64bits(b[v]) {
				t.Fatalf("%s[%d]: %v on 1 goroutine, %v on 4", name, v, a[v], b[v])
			}
		}
	}
	same("Rho", one.Rho, many.Rho)
	same("RhoVoxel", one.RhoVoxel, many.RhoVoxel)
	same("Sigma2", one.Sigma2, many.Sigma2)
	same("Mean", one.Mean, many.Mean)
	same("beta", one.beta, many.beta)
	for k := range one.Stats {
		same("Stat", one.Stats[k].Stat, many.Stats[k].Stat)
	}
	same("Effect", one.Stats[0].Effect, many.Stats[0].Effect)
	same("SE", one.Stats[0].SE, many.Stats[0].SE)
	if one.Excluded != many.Excluded || one.Excluded == 0 {
		t.Errorf("excluded %d on 1 goroutine, %d on 4; want equal and > 0 (constant voxels)", one.Excluded, many.Excluded)
	}
	if one.FWHMVoxels != many.FWHMVoxels {
		t.Errorf("FWHM %v vs %v", one.FWHMVoxels, many.FWHMVoxels)
	}
}
