package glm

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"
)

func benchGrid(nvox int) ([3]int, []int32) {
	var dims [3]int
	switch nvox {
	case 50_000:
		dims = [3]int{40, 40, 32} // 51 200
	default:
		dims = [3]int{64, 64, 49} // 200 704
	}
	g := dims[0] * dims[1] * dims[2]
	vox := make([]int32, g)
	for i := range vox {
		vox[i] = int32(i)
	}
	return dims, vox
}

func benchDesign(n, p int) *mat.Dense {
	r := rand.New(rand.NewPCG(1, 1))
	x := mat.NewDense(n, p, nil)
	for t := 0; t < n; t++ {
		x.Set(t, 0, 1)
		for j := 1; j < p; j++ {
			x.Set(t, j, r.NormFloat64())
		}
	}
	return x
}

func benchVolumes(g, k int) [][]float32 {
	r := rand.New(rand.NewPCG(2, 2))
	vols := make([][]float32, k)
	for i := range vols {
		vols[i] = make([]float32, g)
		for j := range vols[i] {
			vols[i][j] = float32(1000 + 10*r.NormFloat64())
		}
	}
	return vols
}

// BenchmarkAccumulate: one op is one AddVolume with 20 regressors.
func BenchmarkAccumulate(b *testing.B) {
	for _, nvox := range []int{50_000, 200_000} {
		b.Run(fmt.Sprintf("voxels=%dk", nvox/1000), func(b *testing.B) {
			dims, vox := benchGrid(nvox)
			vols := benchVolumes(len(vox), 2*batch)
			a := NewAccumulator(benchDesign(b.N+1+batch, 20), dims, vox)
			for i := 0; i <= batch; i++ { // first volume and one batch: touch every slab once
				a.AddVolume(vols[i])
			}
			b.ResetTimer()
			for i := 0; i < b.N; i++ {
				a.AddVolume(vols[i%len(vols)])
			}
			a.flush()
			b.StopTimer()
			b.ReportMetric(float64(len(vox))*float64(b.N)/b.Elapsed().Seconds(), "voxel-volumes/s")
		})
	}
}

// BenchmarkFit: the solve from the sums at 200k voxels, 20 regressors, AR(1) with the ρ map
// smoothed, one t contrast; one op is one Fit.
func BenchmarkFit(b *testing.B) {
	dims, vox := benchGrid(200_000)
	const n, p = 40, 20
	vols := benchVolumes(len(vox), n)
	a := NewAccumulator(benchDesign(n, p), dims, vox)
	for _, v := range vols {
		a.AddVolume(v)
	}
	c := make([]float64, p)
	c[1] = 1
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		f, err := a.Fit(Options{VoxelMM: [3]float64{3, 3, 3}, Contrasts: [][][]float64{{c}}})
		if err != nil || math.IsNaN(f.FWHMVoxels[0]) {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(len(vox))*float64(b.N)/b.Elapsed().Seconds(), "voxels/s")
}
