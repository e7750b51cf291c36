package design

import (
	"encoding/json"
	"math"
	"os"
	"testing"
)

type dctFixture struct {
	DCT struct {
		Counts []struct {
			N      int     `json:"n_scans"`
			TR     float64 `json:"TR_s"`
			Cutoff float64 `json:"cutoff_s"`
			K      int     `json:"n_cosines"`
		} `json:"counts"`
		Basis [][]float64 `json:"basis_N10_K3"`
	} `json:"dct"`
}

// TestCosines: K for (n, TR, cutoff) cases, the boundary case included, and
// the basis vectors for n = 10, j = 1..3 against scipy.fft.idct(type=2,
// norm='ortho') 1.10.1 (dct.json, from the reference set's dct_smoothing.json).
func TestCosines(t *testing.T) {
	b, err := os.ReadFile("../../testdata/design/dct.json")
	if err != nil {
		t.Fatal(err)
	}
	var f dctFixture
	if err := json.Unmarshal(b, &f); err != nil {
		t.Fatal(err)
	}
	if len(f.DCT.Counts) != 8 || len(f.DCT.Basis) != 3 {
		t.Fatalf("dct.json: %d counts, %d basis vectors", len(f.DCT.Counts), len(f.DCT.Basis))
	}
	for _, c := range f.DCT.Counts {
		if got := NumCosines(c.N, c.TR, c.Cutoff); got != c.K {
			t.Errorf("NumCosines(%d, %g, %g) = %d, want %d (dct.json)", c.N, c.TR, c.Cutoff, got, c.K)
		}
	}
	for j, want := range f.DCT.Basis {
		got := make([]float64, len(want))
		Cosine(got, j+1)
		if d := maxAbsDiff(got, want); d > tolClosedForm {
			t.Errorf("cosine %d: max abs difference %g from scipy idct", j+1, d)
		}
	}
	// Orthonormal, and orthogonal to the constant (DCT-II identity).
	n := 37
	cs := make([][]float64, 6)
	for j := range cs {
		cs[j] = make([]float64, n)
		Cosine(cs[j], j+1)
	}
	for i := range cs {
		s := 0.0
		for _, v := range cs[i] {
			s += v
		}
		if math.Abs(s) > 1e-13 {
			t.Errorf("cosine %d sums to %g, want 0", i+1, s)
		}
		for j := range cs {
			want := 0.0
			if i == j {
				want = 1
			}
			if d := dot(cs[i], cs[j]); math.Abs(d-want) > 1e-13 {
				t.Errorf("cosines %d·%d = %g, want %g", i+1, j+1, d, want)
			}
		}
	}
	// Off and capped cases (definition).
	if NumCosines(200, 2, 0) != 0 || NumCosines(10, 100, 1e-300) != 9 || NumCosines(1, 2, 128) != 0 {
		t.Error("NumCosines: off (0), capped (n−1) or single-scan case wrong")
	}
}
