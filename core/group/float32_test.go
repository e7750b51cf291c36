package group

import (
	"context"
	"math"
	"math/rand/v2"
	"slices"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// maskedSpace is dims with a ball of voxels left out (so neighbours are missing and the
// analysed voxels are not the whole grid).
func maskedSpace(dims [3]int) Space {
	sp := Space{Dims: dims}
	for v := range dims[0] * dims[1] * dims[2] {
		x, y, z := v%dims[0], v/dims[0]%dims[1], v/(dims[0]*dims[1])
		dx, dy, dz := float64(x-dims[0]/2), float64(y-dims[1]/3), float64(z-dims[2]/2)
		if dx*dx+dy*dy+dz*dz > 6 {
			sp.Voxels = append(sp.Voxels, int32(v))
		}
	}
	return sp
}

// float32Data is smooth noise on sp's voxels rounded to float32 (as maps are read), with a
// shift so that the one-sample statistic has both signs; as float32 and the same values as
// float64.
func float32Data(rng *rand.Rand, n int, sp Space) ([]float32, []float64) {
	full := smoothNoise(rng, n, sp.Dims, 1.2)
	nvox := sp.Dims[0] * sp.Dims[1] * sp.Dims[2]
	v := len(sp.Voxels)
	y32 := make([]float32, n*v)
	y64 := make([]float64, n*v)
	for i := range n {
		for k, g := range sp.Voxels {
			y32[i*v+k] = float32(full[i*nvox+int(g)] + 0.15)
			y64[i*v+k] = float64(y32[i*v+k])
		}
	}
	return y32, y64
}

// TestPrepareFloat32SameResults: PrepareFloat32 on float32 data gives bit-identical observed
// maps, maxima, exceedance counts and smoothness to Prepare on the same values as float64
// (the reference: Prepare's float64 path, which PrepareFloat32 must reproduce exactly since
// float32 → float64 is exact), for a one-sample model (the data kept as float32), a model with
// nuisance columns (float64 residuals from float32 data), t and F contrasts, any block size
// and any worker count.
func TestPrepareFloat32SameResults(t *testing.T) {
	dims := [3]int{11, 9, 7}
	sp := maskedSpace(dims)
	rng := rand.New(rand.NewPCG(8, 9))
	n := 13
	y32, y64 := float32Data(rng, n, sp)
	x := mat.NewDense(n, 3, nil)
	for i := range n {
		x.SetRow(i, []float64{1, float64(i % 2), float64(i*5%7) - 3})
	}
	cases := []struct {
		name string
		x    *mat.Dense
		c    [][]float64
	}{
		{"one-sample", onesDesign(n), [][]float64{{1}}},
		{"covariate t", x, [][]float64{{0, 1, 0}}},
		{"intercept t", x, [][]float64{{1, 0, 0}}},
		{"F", x, [][]float64{{0, 1, 0}, {0, 0, 1}}},
	}
	ctx := context.Background()
	for _, tc := range cases {
		m, err := NewModel(tc.x, tc.c)
		if err != nil {
			t.Fatal(err)
		}
		ref := m.Prepare(y64, sp)
		got := m.PrepareFloat32(y32, sp)
		if tc.name == "one-sample" && got.rz32 == nil {
			t.Errorf("%s: the float32 data were not kept", tc.name)
		}
		if a, b := ref.Smoothness(), Smoothness(ref.Residuals(), n, sp, m.DF); a != b {
			t.Errorf("%s: streamed smoothness %v, from the residuals %v", tc.name, a, b)
		}
		if a, b := got.Smoothness(), Smoothness(ref.Residuals(), n, sp, m.DF); a != b {
			t.Errorf("%s: smoothness of the float32 problem %v, float64 %v", tc.name, a, b)
		}
		if !slices.Equal(got.Residuals(), ref.Residuals()) {
			t.Errorf("%s: residuals differ", tc.name)
		}
		pl, _ := m.Plan(60, 3)
		for _, stats := range []Stats{MaxStat | MaxTFCE, MaxStat | MaxCluster | MaxTFCE} {
			opt := Options{Stats: stats, Cluster: 1.5, Workers: 1}
			obsRef := ref.Observe(&pl, opt)
			obs := got.Observe(&pl, opt)
			if !slices.Equal(obs.Stat, obsRef.Stat) || !slices.Equal(obs.TFCE, obsRef.TFCE) || !slices.Equal(obs.Grid, obsRef.Grid) || obs.Max != obsRef.Max {
				t.Errorf("%s: observed maps differ", tc.name)
			}
			for l := range obs.Effect {
				if !slices.Equal(obs.Effect[l], obsRef.Effect[l]) {
					t.Errorf("%s: observed effect %d differs", tc.name, l)
				}
			}
			a, err := ref.Run(ctx, &pl, 0, pl.N, opt)
			if err != nil {
				t.Fatal(err)
			}
			for _, o := range []Options{{Workers: 1, Block: 1}, {Workers: 3, Block: 5}, {Workers: 2}} {
				o.Stats, o.Cluster = opt.Stats, opt.Cluster
				b, err := got.Run(ctx, &pl, 0, pl.N, o)
				if err != nil {
					t.Fatal(err)
				}
				if !slices.Equal(a.Stat, b.Stat) || !slices.Equal(a.TFCE, b.TFCE) || !slices.Equal(a.Cluster, b.Cluster) {
					t.Errorf("%s, stats %b, %d workers, block %d: maxima differ from Prepare's", tc.name, stats, o.Workers, o.Block)
				}
			}
			opt.Observed, opt.Exceed = obsRef, true
			ea, _ := ref.Run(ctx, &pl, 0, pl.N, opt)
			opt.Observed = obs
			eb, _ := got.Run(ctx, &pl, 0, pl.N, opt)
			if !slices.Equal(ea.Exceed, eb.Exceed) || !slices.Equal(ea.Stat, eb.Stat) {
				t.Errorf("%s: exceedance counts differ", tc.name)
			}
		}
	}
}

// TestSmoothnessStreamedLarge: the streamed smoothness equals Smoothness of the full
// residuals on a grid whose slices exceed one voxel chunk (so neighbours along z lie in the
// next chunk), and a non-ascending voxel list takes the full residuals.
func TestSmoothnessStreamedLarge(t *testing.T) {
	dims := [3]int{70, 64, 5}
	sp := maskedSpace(dims)
	rng := rand.New(rand.NewPCG(2, 3))
	n := 6
	y32, _ := float32Data(rng, n, sp)
	m, err := NewModel(onesDesign(n), [][]float64{{1}})
	if err != nil {
		t.Fatal(err)
	}
	p := m.PrepareFloat32(y32, sp)
	want := Smoothness(p.Residuals(), n, sp, m.DF)
	if got := p.Smoothness(); got != want {
		t.Errorf("streamed %v, full residuals %v", got, want)
	}
	for _, f := range want {
		if !(f > 0) || math.IsInf(f, 0) {
			t.Errorf("FWHM %v: want finite positive values for smooth noise", want)
		}
	}
	// Swap two voxels: no longer ascending.
	sw := Space{Dims: dims, Voxels: slices.Clone(sp.Voxels)}
	sw.Voxels[0], sw.Voxels[1] = sw.Voxels[1], sw.Voxels[0]
	v := len(sw.Voxels)
	ys := slices.Clone(y32)
	for i := range n {
		ys[i*v], ys[i*v+1] = ys[i*v+1], ys[i*v]
	}
	q := m.PrepareFloat32(ys, sw)
	if got := q.Smoothness(); got != Smoothness(q.Residuals(), n, sw, m.DF) {
		t.Errorf("non-ascending voxels: %v, want %v", got, Smoothness(q.Residuals(), n, sw, m.DF))
	}
}
