package group

import (
	"context"
	"math"
	"math/rand/v2"
	"sync"
	"testing"

	"gonum.org/v1/gonum/mat"

	"winnow/core/smooth"
)

// harnessMap is one subject map of the group_perm_seconds workload, built as the benchmark
// harness (scripts/bench) builds it: unit-variance smooth noise (σ 1.5 voxels) plus four
// Gaussian blobs of amplitude 3 to 5, as float32 values.
func harnessMap(dims [3]int, seed uint64) []float32 {
	n := dims[0] * dims[1] * dims[2]
	r := rand.New(rand.NewPCG(seed, 0x74666365))
	white := make([]float64, n)
	for i := range white {
		white[i] = r.NormFloat64()
	}
	all := make([]bool, n)
	for i := range all {
		all[i] = true
	}
	sm := smooth.New(dims, [3]float64{1.5, 1.5, 1.5}, all)
	out := make([]float64, n)
	sm.Float64(out, white)
	ss := 0.0
	for _, v := range out {
		ss += v * v
	}
	scale := 1 / math.Sqrt(ss/float64(n))
	nx, ny := dims[0], dims[1]
	fx, fy, fz := float64(dims[0]), float64(dims[1]), float64(dims[2])
	blobs := [][5]float64{{0.27, 0.34, 0.32, 4, 5}, {0.68, 0.54, 0.54, 3, 4}, {0.5, 0.81, 0.76, 5, 3}, {0.81, 0.2, 0.22, 3, 4.5}}
	res := make([]float32, n)
	for v := range out {
		i, j, k := float64(v%nx), float64((v/nx)%ny), float64(v/(nx*ny))
		val := out[v] * scale
		for _, b := range blobs {
			di, dj, dk := i-b[0]*fx, j-b[1]*fy, k-b[2]*fz
			val += b[4] * math.Exp(-(di*di+dj*dj+dk*dk)/(2*b[3]*b[3]))
		}
		res[v] = float32(val)
	}
	return res
}

// harnessProblem is the group_perm_seconds problem: 20 one-sample maps of 74×74×37 voxels,
// each 0.3·(a shared map) + (its own map), all voxels analysed, 5000 sign flips, seed 1.
var harnessProblem = sync.OnceValues(func() (*Problem, Plan) {
	dims := [3]int{74, 74, 37}
	nv := dims[0] * dims[1] * dims[2]
	const n, seed = 20, 1
	common := harnessMap(dims, seed)
	y := make([]float64, n*nv)
	for i := range n {
		noise := harnessMap(dims, seed+uint64(i)+1)
		for v := range noise {
			y[i*nv+v] = 0.3*float64(common[v]) + float64(noise[v])
		}
	}
	ones := make([]float64, n)
	for i := range ones {
		ones[i] = 1
	}
	m, err := NewModel(mat.NewDense(n, 1, ones), [][]float64{{1}})
	if err != nil {
		panic(err)
	}
	pl, err := m.Plan(5000, seed)
	if err != nil {
		panic(err)
	}
	return m.Prepare(y, fullSpace(dims)), pl
})

// BenchmarkHarnessGroup runs relabellings of the group_perm_seconds problem (MaxTFCE only, as
// the harness asks) on 2 workers, 128 per op, and reports wall and process CPU time per
// relabelling; × 5000 gives the figure (wall on two free cores).
func BenchmarkHarnessGroup(b *testing.B) { benchHarness(b, 2) }

// BenchmarkHarnessGroup1 is BenchmarkHarnessGroup on one worker.
func BenchmarkHarnessGroup1(b *testing.B) { benchHarness(b, 1) }

func benchHarness(b *testing.B, workers int) {
	prob, pl := harnessProblem()
	opt := Options{Stats: MaxTFCE, Workers: workers}
	per := 64 * workers
	b.ResetTimer()
	start := cpuTime()
	for i := range b.N {
		lo := 1 + (i*per)%(pl.N-per)
		if _, err := prob.Run(context.Background(), &pl, lo, lo+per, opt); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(b.Elapsed().Seconds()*1e3/float64(b.N*per), "wall-ms/relabelling")
	if start != 0 {
		b.ReportMetric(float64((cpuTime()-start).Nanoseconds())/1e6/float64(b.N*per), "cpu-ms/relabelling")
	}
}
