package smooth

import (
	"encoding/json"
	"math"
	"math/rand/v2"
	"os"
	"testing"
)

type fixture struct {
	Smoothing struct {
		Kernels []struct {
			FWHM    float64     `json:"fwhm_mm"`
			VoxelMM [3]float64  `json:"voxel_mm"`
			Sigma   [3]float64  `json:"sigma_vox"`
			Radius  [3]int      `json:"radius_vox"`
			Kernels [][]float64 `json:"kernels_1d"`
		} `json:"kernels"`
		Masked struct {
			X       []float64 `json:"x"`
			Mask    []float64 `json:"mask"`
			Sigma   float64   `json:"sigma_vox"`
			Masked  []float64 `json:"masked_normalised"`
			ZeroPad []float64 `json:"zero_padded_times_mask"`
		} `json:"masked_1d_example"`
	} `json:"smoothing"`
}

func load(t *testing.T) fixture {
	t.Helper()
	b, err := os.ReadFile("../../testdata/smooth/smoothing.json")
	if err != nil {
		t.Fatal(err)
	}
	var f fixture
	if err := json.Unmarshal(b, &f); err != nil {
		t.Fatal(err)
	}
	return f
}

func close(a, b, tol float64) bool {
	return math.Abs(a-b) <= tol*math.Max(1, math.Abs(b))
}

// Source: testdata/smooth/smoothing.json (scipy 1.10.1 gaussian_filter1d, truncate 4).
func TestSigmasAndKernels(t *testing.T) {
	f := load(t)
	if len(f.Smoothing.Kernels) == 0 {
		t.Fatal("no kernels in fixture")
	}
	for _, c := range f.Smoothing.Kernels {
		s := Sigmas(c.FWHM, c.VoxelMM)
		for ax := 0; ax < 3; ax++ {
			if !close(s[ax], c.Sigma[ax], 1e-12) {
				t.Errorf("FWHM %g vox %v axis %d: σ = %.17g, want %.17g", c.FWHM, c.VoxelMM, ax, s[ax], c.Sigma[ax])
			}
			k := Kernel(s[ax])
			if len(k) != 2*c.Radius[ax]+1 || len(k) != len(c.Kernels[ax]) {
				t.Fatalf("axis %d: kernel length %d, want %d", ax, len(k), 2*c.Radius[ax]+1)
			}
			for i := range k {
				if math.Abs(k[i]-c.Kernels[ax][i]) > 1e-12 {
					t.Errorf("axis %d weight %d: %.17g, want %.17g", ax, i, k[i], c.Kernels[ax][i])
				}
			}
		}
	}
}

// Source: smoothing.json masked_1d_example (scipy 1.10.1, mode 'constant'): the normalised
// S(x·m)/S(m) inside the mask, 0 outside. Run along each of the three axes in turn.
func TestMasked1D(t *testing.T) {
	m := load(t).Smoothing.Masked
	n := len(m.X)
	for ax := 0; ax < 3; ax++ {
		var dims [3]int = [3]int{1, 1, 1}
		dims[ax] = n
		var sig [3]float64
		sig[ax] = m.Sigma
		mask := make([]bool, n)
		x32 := make([]float32, n)
		for i := range mask {
			mask[i] = m.Mask[i] > 0
			x32[i] = float32(m.X[i]) // small integers: exact in float32
		}
		s := New(dims, sig, mask)
		got := make([]float64, n)
		s.Float64(got, m.X)
		for i := range got {
			if math.Abs(got[i]-m.Masked[i]) > 1e-12 {
				t.Errorf("axis %d voxel %d: %.17g, want %.17g", ax, i, got[i], m.Masked[i])
			}
		}
		g32 := make([]float32, n)
		s.Float32(g32, x32)
		for i := range g32 {
			if math.Abs(float64(g32[i])-m.Masked[i]) > 1e-6*math.Max(1, m.Masked[i]) {
				t.Errorf("float32 axis %d voxel %d: %g, want %g", ax, i, g32[i], m.Masked[i])
			}
		}
		// Without a mask over a fully positive mask region the plain filter is recovered:
		// zero-padded smoothing times the mask (fixture column zero_padded_times_mask).
		full := New(dims, sig, nil)
		xm := make([]float64, n)
		for i := range xm {
			xm[i] = m.X[i] * m.Mask[i]
		}
		full.Float64(got, xm)
		// nil mask normalises by S(1), which is not 1 at the ends; undo it to compare.
		ones := make([]float64, n)
		for i := range ones {
			ones[i] = 1
		}
		den := make([]float64, n)
		raw := New(dims, sig, nil)
		copy(raw.a, ones)
		copy(den, raw.filter())
		for i := range got {
			want := m.ZeroPad[i]
			g := got[i] * den[i] * m.Mask[i]
			if math.Abs(g-want) > 1e-12 {
				t.Errorf("axis %d voxel %d zero-padded: %.17g, want %.17g", ax, i, g, want)
			}
		}
	}
}

// Identity (exact for a separable filter normalised within the mask): a constant volume stays
// constant inside the mask and is 0 outside; a sum-1 kernel preserves a constant.
func TestConstantPreservedAnd3DSeparable(t *testing.T) {
	dims := [3]int{9, 7, 6}
	n := dims[0] * dims[1] * dims[2]
	mask := make([]bool, n)
	r := rand.New(rand.NewPCG(1, 2))
	for i := range mask {
		mask[i] = r.Float64() < 0.7
	}
	s := New(dims, [3]float64{1.1, 0.9, 0.2}, mask) // z skipped (σ < 0.3)
	src := make([]float64, n)
	for i := range src {
		src[i] = 42
	}
	dst := make([]float64, n)
	s.Float64(dst, src)
	for i := range dst {
		want := 0.0
		if mask[i] {
			want = 42
		}
		if math.Abs(dst[i]-want) > 1e-12 {
			t.Fatalf("voxel %d: %g, want %g", i, dst[i], want)
		}
	}
	// Against a direct 3D sum with the product kernel (brute force), random data.
	for i := range src {
		src[i] = r.NormFloat64()
	}
	s.Float64(dst, src)
	kx, ky := Kernel(1.1), Kernel(0.9)
	rx, ry := len(kx)/2, len(ky)/2
	for k := 0; k < dims[2]; k++ {
		for j := 0; j < dims[1]; j++ {
			for i := 0; i < dims[0]; i++ {
				idx := i + dims[0]*(j+dims[1]*k)
				if !mask[idx] {
					if dst[idx] != 0 {
						t.Fatalf("outside voxel %d = %g", idx, dst[idx])
					}
					continue
				}
				var num, den float64
				for dj := -ry; dj <= ry; dj++ {
					for di := -rx; di <= rx; di++ {
						ii, jj := i+di, j+dj
						if ii < 0 || jj < 0 || ii >= dims[0] || jj >= dims[1] {
							continue
						}
						q := ii + dims[0]*(jj+dims[1]*k)
						if mask[q] {
							w := kx[di+rx] * ky[dj+ry]
							num += w * src[q]
							den += w
						}
					}
				}
				if math.Abs(dst[idx]-num/den) > 1e-12 {
					t.Fatalf("voxel (%d,%d,%d): %.15g, want %.15g", i, j, k, dst[idx], num/den)
				}
			}
		}
	}
}
