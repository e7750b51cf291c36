package cluster

import (
	"math"
	"sync"
	"testing"
	"time"
)

// benchDims is a 202 612-voxel grid (a 3 mm brain-sized box).
var benchDims = [3]int{74, 74, 37}

var benchMap = sync.OnceValue(func() []float32 {
	a := smoothNoise(benchDims, 2, 42)
	// Positive Gaussian blobs of amplitude 3 to 5 on the unit-variance smooth noise.
	blobs := [][5]float64{{20, 25, 12, 4, 5}, {50, 40, 20, 3, 4}, {37, 60, 28, 5, 3}, {60, 15, 8, 3, 4.5}}
	nx, ny := benchDims[0], benchDims[1]
	for v := range a {
		i, j, k := float64(v%nx), float64((v/nx)%ny), float64(v/(nx*ny))
		for _, b := range blobs {
			d2 := (i-b[0])*(i-b[0]) + (j-b[1])*(j-b[1]) + (k-b[2])*(k-b[2])
			a[v] += b[4] * math.Exp(-d2/(2*b[3]*b[3]))
		}
	}
	return to32(a)
})

// BenchmarkTFCEExact is one exact TFCE (positive tail, 26-connectivity, E 0.5, H 2) with a
// reused workspace, as permutation workers call it.
func BenchmarkTFCEExact(b *testing.B) {
	img := benchMap()
	ws := NewTFCEWorkspace(benchDims, Corners)
	dst := make([]float64, len(img))
	TFCETo(ws, dst, img, 0.5, 2, TailPositive)
	b.ReportAllocs()
	for b.Loop() {
		TFCETo(ws, dst, img, 0.5, 2, TailPositive)
	}
	b.ReportMetric(float64(len(img))*float64(b.N)/b.Elapsed().Seconds(), "voxels/s")
}

// BenchmarkTFCEExactAlloc is a one-off [TFCE] call, which allocates its workspace and map.
func BenchmarkTFCEExactAlloc(b *testing.B) {
	img := benchMap()
	b.ReportAllocs()
	for b.Loop() {
		TFCE(img, benchDims, Corners, 0.5, 2)
	}
}

// BenchmarkTFCEExactFloat64 is BenchmarkTFCEExact on a float64 copy of the map
// (64-bit sort keys).
func BenchmarkTFCEExactFloat64(b *testing.B) {
	img32 := benchMap()
	img := make([]float64, len(img32))
	for v, x := range img32 {
		img[v] = float64(x)
	}
	ws := NewTFCEWorkspace(benchDims, Corners)
	dst := make([]float64, len(img))
	TFCETo(ws, dst, img, 0.5, 2, TailPositive)
	b.ReportAllocs()
	for b.Loop() {
		TFCETo(ws, dst, img, 0.5, 2, TailPositive)
	}
}

// BenchmarkTFCEStepped is the discretised form with dh = 0.1 on the same map.
func BenchmarkTFCEStepped(b *testing.B) {
	img := benchMap()
	b.ReportAllocs()
	for b.Loop() {
		TFCEStepped(img, benchDims, Corners, 0.5, 2, 0.1)
	}
}

// BenchmarkLabelTable labels {stat > 2.3} with 26-connectivity and builds the cluster table.
func BenchmarkLabelTable(b *testing.B) { benchmarkLabelTable(b, 2.3) }

// BenchmarkLabelTableDense does the same for {stat > 0}, about half the grid.
func BenchmarkLabelTableDense(b *testing.B) { benchmarkLabelTable(b, 0) }

func benchmarkLabelTable(b *testing.B, thr float32) {
	img := benchMap()
	in := make([]bool, len(img))
	for v, x := range img {
		in[v] = x > thr
	}
	aff := [4][4]float64{{-3, 0, 0, 110}, {0, 3, 0, -110}, {0, 0, 3, -60}, {0, 0, 0, 1}}
	b.ReportAllocs()
	var n int
	for b.Loop() {
		n = len(Clusters(img, in, benchDims, Corners, aff, TableOptions{}))
	}
	b.ReportMetric(float64(n), "clusters")
}

// BenchmarkLabel is the labelling alone, of {stat > 0} (about half the grid).
func BenchmarkLabel(b *testing.B) {
	img := benchMap()
	in := make([]bool, len(img))
	for v, x := range img {
		in[v] = x > 0
	}
	b.ReportAllocs()
	for b.Loop() {
		Label(in, benchDims, Corners)
	}
}

// benchNull is a null-like statistic map: smooth noise (σ 1.5 voxels) of unit variance, about
// half of it above 0, like a t map of a sign flip.
var benchNull = sync.OnceValue(func() []float32 { return to32(smoothNoise(benchDims, 1.5, 7)) })

// BenchmarkTFCEMaxNull is the permutation step: the largest TFCE⁺ of a null map
// ([TFCEMaxTail], positive tail), with a reused workspace. cpu-ns/op is the process CPU time
// per call (steadier than ns/op on a shared machine).
func BenchmarkTFCEMaxNull(b *testing.B) {
	img := benchNull()
	ws := NewTFCEWorkspace(benchDims, Corners)
	TFCEMaxTail(ws, img, 0.5, 2, TailPositive)
	b.ReportAllocs()
	start := cpuTime()
	for b.Loop() {
		TFCEMaxTail(ws, img, 0.5, 2, TailPositive)
	}
	reportCPU(b, start)
}

// BenchmarkTFCEMapNull is the same maximum taken from the whole map ([TFCETo]), for comparison.
func BenchmarkTFCEMapNull(b *testing.B) {
	img := benchNull()
	ws := NewTFCEWorkspace(benchDims, Corners)
	dst := make([]float64, len(img))
	TFCETo(ws, dst, img, 0.5, 2, TailPositive)
	b.ReportAllocs()
	start := cpuTime()
	for b.Loop() {
		TFCETo(ws, dst, img, 0.5, 2, TailPositive)
		m := 0.0
		for _, x := range dst {
			m = max(m, x)
		}
		_ = m
	}
	reportCPU(b, start)
}

// reportCPU adds the process CPU time per operation (cpu-ns/op).
func reportCPU(b *testing.B, start time.Duration) {
	if start == 0 || b.N == 0 {
		return
	}
	b.ReportMetric(float64((cpuTime()-start).Nanoseconds())/float64(b.N), "cpu-ns/op")
}
