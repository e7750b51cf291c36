package glm

import (
	"math"
	"strings"
	"testing"

	"gonum.org/v1/gonum/mat"
)

func tinyDesign(n int) *mat.Dense {
	x := mat.NewDense(n, 2, nil)
	for t := 0; t < n; t++ {
		x.Set(t, 0, 1)
		x.Set(t, 1, math.Sin(float64(t)))
	}
	return x
}

// Bad input gives an error naming the field (project rules), never a panic.
func TestFitErrors(t *testing.T) {
	dims := [3]int{2, 1, 1}
	vox := []int32{0, 1}
	add := func(a *Accumulator, k int) {
		for i := 0; i < k; i++ {
			a.AddVolume([]float32{float32(i), float32(i * i)})
		}
	}
	cases := []struct {
		name string
		x    *mat.Dense
		vols int
		opt  Options
		want string
	}{
		{"too few volumes", tinyDesign(10), 9, Options{}, "9 volumes added, want 10"},
		{"too many volumes", tinyDesign(10), 12, Options{}, "12 volumes added, want 10"},
		{"contrast length", tinyDesign(10), 10, Options{Noise: NoiseOLS, Contrasts: [][][]float64{{{1, 2, 3}}}}, "row 1 has 3 weights, want 2"},
		{"zero contrast", tinyDesign(10), 10, Options{Noise: NoiseOLS, Contrasts: [][][]float64{{{0, 0}}}}, "all zero"},
		{"voxel size", tinyDesign(10), 10, Options{}, "Options.VoxelMM[0] = 0"},
		{"fixed rho", tinyDesign(10), 10, Options{FixedRho: new(1.0)}, "Options.FixedRho = 1"},
		{"noise", tinyDesign(10), 10, Options{Noise: 7}, "Options.Noise = 7"},
		{"rows", tinyDesign(2), 2, Options{}, "2 rows (volumes), want more than its 2 columns"},
	}
	zero := mat.NewDense(10, 2, nil)
	for t := 0; t < 10; t++ {
		zero.Set(t, 0, 1)
	}
	dup := mat.NewDense(10, 3, nil)
	for t := 0; t < 10; t++ {
		dup.Set(t, 0, 1)
		dup.Set(t, 1, float64(t))
		dup.Set(t, 2, 2*float64(t)+3)
	}
	cases = append(cases,
		struct {
			name string
			x    *mat.Dense
			vols int
			opt  Options
			want string
		}{"zero column", zero, 10, Options{Noise: NoiseOLS}, "design column 1 is all zero"},
		struct {
			name string
			x    *mat.Dense
			vols int
			opt  Options
			want string
		}{"rank", dup, 10, Options{Noise: NoiseOLS}, "rank 2, want full column rank 3"})
	for _, c := range cases {
		a := NewAccumulator(c.x, dims, vox)
		add(a, c.vols)
		_, err := a.Fit(c.opt)
		if err == nil || !strings.Contains(err.Error(), c.want) || !strings.HasPrefix(err.Error(), "glm: ") {
			t.Errorf("%s: error %v, want one containing %q", c.name, err, c.want)
		}
	}
}

// Constant and non-finite voxels are excluded and marked; stats there are NaN.
func TestExcludedVoxels(t *testing.T) {
	s := newSynthRun(5, 40, true)
	cons, nan := s.voxels[3], s.voxels[7]
	for i, v := range s.vols {
		v[cons] = 1234
		if i == 17 {
			v[nan] = float32(math.NaN())
		}
	}
	_, p := s.x.Dims()
	c := make([]float64, p)
	c[1] = 1
	f, _ := s.fit(t, Options{VoxelMM: [3]float64{3, 3, 3}, Contrasts: [][][]float64{{c}}})
	if f.Excluded != 2 || f.Valid[3] || f.Valid[7] || len(f.Warnings) != 1 {
		t.Fatalf("excluded %d, valid[3] %v, valid[7] %v, warnings %q", f.Excluded, f.Valid[3], f.Valid[7], f.Warnings)
	}
	for _, v := range []int{3, 7} {
		if !math.IsNaN(f.Stats[0].Stat[v]) || !math.IsNaN(f.Sigma2[v]) || !math.IsNaN(f.Rho[v]) {
			t.Errorf("voxel %d: stat %g sigma2 %g rho %g, want NaN", v, f.Stats[0].Stat[v], f.Sigma2[v], f.Rho[v])
		}
	}
	if f.Mean[3] != 1234 {
		t.Errorf("mean of constant voxel = %g, want 1234", f.Mean[3])
	}
	for v := range f.Voxels {
		if f.Valid[v] && math.IsNaN(f.Stats[0].Stat[v]) {
			t.Errorf("valid voxel %d has NaN t", v)
		}
	}
	for ax := 0; ax < 3; ax++ {
		if !(f.FWHMVoxels[ax] > 0) || math.IsInf(f.FWHMVoxels[ax], 0) {
			t.Errorf("FWHM axis %d = %g", ax, f.FWHMVoxels[ax])
		}
	}
}

// Memory accounting: Bytes never exceeds the documented bound.
func TestBytesBound(t *testing.T) {
	s := newSynthRun(5, 20, true)
	_, p := s.x.Dims()
	a := NewAccumulator(s.x, s.dims, s.voxels)
	if b, ub := a.Bytes(), AccumulatorBytes(p, len(s.voxels)); b > ub || b <= 0 {
		t.Errorf("Bytes %d, bound %d", b, ub)
	}
}

// Streaming sums do not depend on when the partial batch is flushed: a fit in the middle of
// the stream (Fit errors on the count) followed by the rest equals a straight run.
func TestFlushIdempotent(t *testing.T) {
	s := newSynthRun(9, 43, true)
	a := NewAccumulator(s.x, s.dims, s.voxels)
	b := NewAccumulator(s.x, s.dims, s.voxels)
	for i, v := range s.vols {
		a.AddVolume(v)
		b.AddVolume(v)
		if i == 21 {
			if _, err := a.Fit(Options{}); err == nil {
				t.Fatal("want a volume-count error")
			}
		}
	}
	fa, err := a.Fit(Options{Noise: NoiseOLS})
	if err != nil {
		t.Fatal(err)
	}
	fb, _ := b.Fit(Options{Noise: NoiseOLS})
	for v := range fa.Voxels {
		checkRel(t, "sigma2", fa.Sigma2[v], fb.Sigma2[v], 1e-12)
	}
}

// Degenerate grids do not panic: no voxels at all, and a single slice (no z neighbours, so
// the z smoothness is NaN as documented).
func TestDegenerateGrids(t *testing.T) {
	x := tinyDesign(12)
	a := NewAccumulator(x, [3]int{3, 3, 1}, nil)
	for i := 0; i < 12; i++ {
		a.AddVolume(make([]float32, 9))
	}
	f, err := a.Fit(Options{VoxelMM: [3]float64{2, 2, 2}})
	if err != nil || len(f.Valid) != 0 {
		t.Fatalf("empty: %v", err)
	}
	vox := []int32{0, 1, 2, 3, 4, 5, 6, 7, 8}
	a = NewAccumulator(x, [3]int{3, 3, 1}, vox)
	for i := 0; i < 12; i++ {
		v := make([]float32, 9)
		for j := range v {
			v[j] = float32(100 + (i*7+j*3)%5)
		}
		a.AddVolume(v)
	}
	f, err = a.Fit(Options{VoxelMM: [3]float64{2, 2, 2}})
	if err != nil {
		t.Fatal(err)
	}
	if !math.IsNaN(f.FWHMVoxels[2]) || math.IsNaN(f.FWHMVoxels[0]) {
		t.Errorf("FWHM %v, want NaN only along z", f.FWHMVoxels)
	}
}
