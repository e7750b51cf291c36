package contrast

import (
	"strings"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// design builds an 8-scan design in which one column is the sum of two
// others, by construction (common practice: a column that is a sum of two others makes
// the model rank-deficient). The columns are a, b·bScale, c = a + b·bScale
// and an intercept; a, b and the intercept are linearly independent (scan 4
// has a = b = 0, scan 1 a = 1, b = 0; scan 2 a = 0, b = 1), so the null space
// of X is spanned by v = (1, 1, -1, 0), worked out by hand.
func design(bScale float64) *mat.Dense {
	a := []float64{1, 0, 1, 0, 1, 1, 0, 0}
	b := []float64{0, 1, 1, 0, 0, 1, 1, 0}
	x := mat.NewDense(len(a), 4, nil)
	for i := range a {
		x.Set(i, 0, a[i])
		x.Set(i, 1, b[i]*bScale)
		x.Set(i, 2, a[i]+b[i]*bScale)
		x.Set(i, 3, 1)
	}
	return x
}

var cols = []string{"a", "b", "c", "intercept"}

func mustParse(t *testing.T, spec string) *Contrast {
	t.Helper()
	c, err := Parse(spec, cols)
	if err != nil {
		t.Fatal(err)
	}
	return c
}

// A contrast w is estimable iff w·v = 0 for the null vector v = (1, 1, -1, 0)
// (by hand), e.g. a - b: 1 - 1 = 0; a: 1 ≠ 0; c - a: -1 - 1 = -2 ≠ 0.
func TestEstimable(t *testing.T) {
	cases := []struct {
		spec string
		ok   bool
		msg  string
	}{
		{"d=a - b", true, ""},
		{"s=a + c", true, ""},
		{"i=intercept", true, ""},
		{"f=a - b, intercept", true, ""},
		{"f=a + c, a - b, 2*a - b + c", true, ""},
		{"a=a", false, `contrast "a" ("a") is not estimable: the design cannot separate the columns a, b, c`},
		{"ca=c - a", false, `contrast "ca" ("c - a") is not estimable`},
		{"f=a - b, a", false, `contrast "f", row 2 ("a"), is not estimable`},
		{"tiny=1.000000001*a - b", true, ""},                // w·v = 1e-9, relative distance 1e-9/(√3·√2) = 4e-10 < 1e-8 (by hand)
		{"small=1.000001*a - b", false, "is not estimable"}, // 1e-6/√6 = 4e-7 > 1e-8 (by hand)
	}
	for _, scale := range []float64{1, 1000} { // very different column norms give the same answers
		x := design(scale)
		for _, c := range cases {
			err := Estimable(mustParse(t, c.spec), x)
			if c.ok && err != nil {
				t.Errorf("scale %g: Estimable(%q): %v", scale, c.spec, err)
			}
			if !c.ok && (err == nil || !strings.Contains(err.Error(), c.msg)) {
				t.Errorf("scale %g: Estimable(%q) = %v, want an error containing %q", scale, c.spec, err, c.msg)
			}
		}
	}
}

// For w = "a" = (1, 0, 0, 0): the null space of X is spanned by
// v = (1, 1, -1, 0) for either scale of b (a + b·k - c = 0), so
// w − (X⁺X)w = (w·v/‖v‖²)v has length |w·v|/‖v‖ = 1/√3 = 0.577, relative to
// ‖w‖ = 1 (by hand).
func TestEstimableDistance(t *testing.T) {
	err := Estimable(mustParse(t, "a=a"), design(1))
	if err == nil || !strings.Contains(err.Error(), "distance from the design's row space is 0.577 of its length") {
		t.Errorf("error %v, want relative distance 0.577", err)
	}
}

// An all-zero column (a condition without events) gives no information; the
// difference of the two other conditions is still estimable.
func TestEstimableZeroColumn(t *testing.T) {
	x := mat.NewDense(4, 3, []float64{
		1, 0, 0,
		0, 0, 1,
		1, 0, 1,
		0, 0, 0,
	})
	names := []string{"a", "z", "b"}
	c, _ := Parse("z=z", names)
	err := Estimable(c, x)
	if err == nil || !strings.Contains(err.Error(), "no information on z") {
		t.Errorf("error %v, want no information on z", err)
	}
	c, _ = Parse("d=a - b", names)
	if err := Estimable(c, x); err != nil {
		t.Error(err)
	}
}

// q* = rank(C (X'X)⁺ C'), by hand from the null vector (1, 1, -1, 0): the
// estimable functions are spanned by a + c, b + c and the intercept.
func TestRank(t *testing.T) {
	cases := []struct {
		spec string
		want int
	}{
		{"t=a - b", 1},
		{"f=a - b, b - a", 1},                   // second row = -first
		{"f=a - b, intercept", 2},               // independent
		{"f=a + c, a - b, 2*a - b + c", 2},      // third = first + second
		{"f=a + c, b + c, intercept", 3},        // a basis of the estimable functions
		{"f=a + c, b + c, intercept, a - b", 3}, // a - b = (a + c) - (b + c)
	}
	for _, scale := range []float64{1, 1000} {
		x := design(scale)
		for _, c := range cases {
			got, err := Rank(mustParse(t, c.spec), x)
			if err != nil || got != c.want {
				t.Errorf("scale %g: Rank(%q) = %d, %v; want %d", scale, c.spec, got, err, c.want)
			}
		}
	}
	if _, err := Rank(mustParse(t, "f=a - b, a"), design(1)); err == nil {
		t.Errorf("Rank of a non-estimable contrast: no error")
	}
}

// On a full-rank design q* is the rank of C itself (C (X'X)⁻¹ C' has full
// rank q when C does: common practice).
func TestRankFullRankDesign(t *testing.T) {
	x := mat.NewDense(5, 3, []float64{
		1, 0, 1,
		0, 1, 1,
		1, 1, 1,
		0, 0, 1,
		2, 1, 1,
	})
	names := []string{"a", "b", "m"}
	for spec, want := range map[string]int{"f=a, b": 2, "f=a, b, m": 3, "f=a, 2*a": 1, "f=a - b, b - m, a - m": 2} {
		c, err := Parse(spec, names)
		if err != nil {
			t.Fatal(err)
		}
		if got, err := Rank(c, x); err != nil || got != want {
			t.Errorf("Rank(%q) = %d, %v; want %d", spec, got, err, want)
		}
	}
}

func TestEstimableBadDesign(t *testing.T) {
	x := mat.NewDense(2, 1, []float64{1, 0})
	x.Set(1, 0, 0)
	c := &Contrast{Name: "x", Weights: [][]float64{{1}}}
	if err := Estimable(c, x); err != nil {
		t.Errorf("hand-built contrast: %v", err)
	}
	x.Set(1, 0, nan())
	if err := Estimable(c, x); err == nil || !strings.Contains(err.Error(), "row 2, column 1") {
		t.Errorf("NaN design: %v", err)
	}
	defer func() {
		if r := recover(); r == nil || !strings.HasPrefix(r.(string), "contrast: ") {
			t.Errorf("wrong weight count: recover() = %v, want a contrast: panic", r)
		}
	}()
	_ = Estimable(&Contrast{Name: "x", Weights: [][]float64{{1, 2}}}, mat.NewDense(2, 1, []float64{1, 1}))
}

func nan() float64 { z := 0.0; return z / z }
