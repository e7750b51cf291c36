package nullcheck

import (
	"math/rand/v2"
	"testing"
	"time"

	"winnow/core/design"
	"winnow/core/glm"
)

// benchRun is a 40×40×30 grid (48 000 voxels, all in the mask) of 200 volumes of AR(1)
// noise with a two-condition event-related design (p = 9 columns with drift and intercept).
type benchRun struct {
	real   *design.Design
	d      *Designs
	dims   [3]int
	voxels []int32
	vols   [][]float32
}

func newBenchRun(b *testing.B, k int) *benchRun {
	const n = 200
	dims := [3]int{40, 40, 30}
	m := dims[0] * dims[1] * dims[2]
	conds := twoConditions(3, n)
	real, opt := buildReal(b, conds, n, false)
	opt.Designs = k
	d, err := Draw(conds, real, opt)
	if err != nil {
		b.Fatal(err)
	}
	voxels := make([]int32, m)
	for i := range voxels {
		voxels[i] = int32(i)
	}
	rng := rand.New(rand.NewPCG(1, 2))
	vols := make([][]float32, n)
	e := make([]float64, m)
	for t := range vols {
		vols[t] = make([]float32, m)
		for i := range e {
			e[i] = 0.3*e[i] + rng.NormFloat64()
			vols[t][i] = float32(1000 + 5*e[i])
		}
	}
	return &benchRun{real: real, d: d, dims: dims, voxels: voxels, vols: vols}
}

func (r *benchRun) glmFit(b *testing.B) *glm.Fit {
	fit, _ := r.glmFitAcc(b)
	return fit
}

// glmFitAcc is glmFit that also returns the accumulator, whose sums a shared null check reads.
func (r *benchRun) glmFitAcc(b *testing.B) (*glm.Fit, *glm.Accumulator) {
	acc := glm.NewAccumulator(r.real.X, r.dims, r.voxels)
	for _, v := range r.vols {
		acc.AddVolume(v)
	}
	w := make([]float64, len(r.real.Columns))
	w[0], w[1] = 1, -1
	fit, err := acc.Fit(glm.Options{VoxelMM: [3]float64{3, 3, 3}, Contrasts: [][][]float64{{w}}})
	if err != nil {
		b.Fatal(err)
	}
	return fit, acc
}

// BenchmarkGLM is the base fit: glm's accumulate (200 volumes) and Fit with one contrast.
func BenchmarkGLM(b *testing.B) {
	r := newBenchRun(b, 1)
	b.ResetTimer()
	for b.Loop() {
		r.glmFit(b)
	}
}

// BenchmarkNullCheck40 is the null check's extra cost on the same data: its accumulate
// over the same 200 volumes and the solve of 40 chance designs at the fit's ρ, one t
// contrast. The ratio to BenchmarkGLM is the null check's cost relative to the base fit.
func BenchmarkNullCheck40(b *testing.B) {
	r := newBenchRun(b, 40)
	fit := r.glmFit(b)
	b.ResetTimer()
	for b.Loop() {
		acc := NewAccumulator(r.d, r.real.X, r.dims, r.voxels, true)
		for _, v := range r.vols {
			acc.AddVolume(v)
		}
		err := acc.Solve(fit.Rho, fit.Valid, [][][]float64{{{1, -1}}}, func(int, []Stat) error { return nil })
		if err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkNullAccumulate40 and BenchmarkNullSolve40 split BenchmarkNullCheck40.
func BenchmarkNullAccumulate40(b *testing.B) {
	r := newBenchRun(b, 40)
	b.ResetTimer()
	for b.Loop() {
		acc := NewAccumulator(r.d, r.real.X, r.dims, r.voxels, true)
		for _, v := range r.vols {
			acc.AddVolume(v)
		}
	}
}

func BenchmarkNullSolve40(b *testing.B) {
	r := newBenchRun(b, 40)
	fit := r.glmFit(b)
	acc := NewAccumulator(r.d, r.real.X, r.dims, r.voxels, true)
	for _, v := range r.vols {
		acc.AddVolume(v)
	}
	b.ResetTimer()
	for b.Loop() {
		err := acc.Solve(fit.Rho, fit.Valid, [][][]float64{{{1, -1}}}, func(int, []Stat) error { return nil })
		if err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkRatio times the base fit (glm accumulate + Fit) and the null check with 40
// chance designs (accumulate + solve, the real design's sums read from the base fit's
// accumulator as the pipeline does) alternately on the same data and reports the ratio
// of the fastest runs of each (robust to other load on the machine) as "null/base".
func BenchmarkRatio(b *testing.B) {
	r := newBenchRun(b, 40)
	best := [2]time.Duration{1 << 62, 1 << 62}
	for b.Loop() {
		t0 := time.Now()
		fit, g := r.glmFitAcc(b)
		best[0] = min(best[0], time.Since(t0))
		t0 = time.Now()
		acc := NewSharedAccumulator(r.d, r.real.X, r.dims, r.voxels, true, g)
		for _, v := range r.vols {
			acc.AddVolume(v)
		}
		if err := acc.Solve(fit.Rho, fit.Valid, [][][]float64{{{1, -1}}}, func(int, []Stat) error { return nil }); err != nil {
			b.Fatal(err)
		}
		best[1] = min(best[1], time.Since(t0))
	}
	b.ReportMetric(best[0].Seconds(), "base-s")
	b.ReportMetric(best[1].Seconds(), "null-s")
	b.ReportMetric(float64(best[1])/float64(best[0]), "null/base")
}
