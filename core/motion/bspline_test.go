package motion

import (
	"math"
	"math/rand/v2"
	"testing"
)

func TestSplineInterpolatesSamples(t *testing.T) {
	// Cubic B-spline interpolation passes through the samples: with the
	// prefilter, Σ c[k] β³(i − k) = s[i] at every grid point (Unser 1999,
	// IEEE SPM 16(6), the interpolation condition).
	dims := [3]int{7, 9, 5}
	rng := rand.New(rand.NewPCG(1, 1))
	n := dims[0] * dims[1] * dims[2]
	s := make([]float64, n)
	for i := range s {
		s[i] = rng.Float64()*100 - 50
	}
	c := append([]float64(nil), s...)
	prefilter3(c, dims, make([]float64, dims[0]*dims[1]))
	for k := 0; k < dims[2]; k++ {
		for j := 0; j < dims[1]; j++ {
			for i := 0; i < dims[0]; i++ {
				got := splineAt(c, dims, float64(i), float64(j), float64(k))
				want := s[i+dims[0]*(j+dims[1]*k)]
				if math.Abs(got-want) > 1e-9 {
					t.Fatalf("(%d,%d,%d): %v, want %v", i, j, k, got, want)
				}
			}
		}
	}
}

func TestSplineReproducesCubics(t *testing.T) {
	// Cubic B-splines reproduce polynomials up to degree 3 (Unser 1999);
	// with mirror boundaries the boundary error decays as |z|^d, z = √3 − 2,
	// so points 12 voxels from the edges are checked to 1e-5 relative.
	dims := [3]int{40, 34, 30}
	f := func(x, y, z float64) float64 {
		return 3 + 0.5*x - 0.2*y + 0.01*x*y + 0.003*z*z*z - 0.02*y*y
	}
	n := dims[0] * dims[1] * dims[2]
	c := make([]float64, n)
	for k := 0; k < dims[2]; k++ {
		for j := 0; j < dims[1]; j++ {
			for i := 0; i < dims[0]; i++ {
				c[i+dims[0]*(j+dims[1]*k)] = f(float64(i), float64(j), float64(k))
			}
		}
	}
	prefilter3(c, dims, make([]float64, dims[0]*dims[1]))
	rng := rand.New(rand.NewPCG(2, 2))
	for trial := 0; trial < 200; trial++ {
		x := 12 + rng.Float64()*float64(dims[0]-25)
		y := 12 + rng.Float64()*float64(dims[1]-25)
		z := 12 + rng.Float64()*float64(dims[2]-25)
		got, want := splineAt(c, dims, x, y, z), f(x, y, z)
		if math.Abs(got-want) > 1e-5*math.Max(1, math.Abs(want)) {
			t.Fatalf("at (%.3f, %.3f, %.3f): %v, want %v", x, y, z, got, want)
		}
	}
}

func TestMirror(t *testing.T) {
	// Whole-sample mirror symmetry about 0 and n−1 (period 2n − 2).
	want := map[int]int{-1: 1, -2: 2, 0: 0, 4: 4, 5: 3, 6: 2, 8: 0, 9: 1, -8: 0}
	for i, w := range want {
		if got := mirror(i, 5); got != w {
			t.Errorf("mirror(%d, 5) = %d, want %d", i, got, w)
		}
	}
}
