package dist

import (
	"math"
	"testing"
)

// The exact interval has closed forms at the ends (by its definition,
// Clopper & Pearson 1934): x = 0 gives upper 1 − (a/2)^(1/n), x = n gives
// lower (a/2)^(1/n), and x = 1 gives lower 1 − (1 − a/2)^(1/n).
func TestClopperPearsonClosedForms(t *testing.T) {
	const a = 0.05
	for _, n := range []int{1, 2, 5, 40, 1000} {
		lo, hi := ClopperPearson(0, n, a)
		if lo != 0 || math.Abs(hi-(1-math.Pow(a/2, 1/float64(n)))) > 1e-10 {
			t.Errorf("x=0 n=%d: [%g, %g]", n, lo, hi)
		}
		lo, hi = ClopperPearson(n, n, a)
		if hi != 1 || math.Abs(lo-math.Pow(a/2, 1/float64(n))) > 1e-10 {
			t.Errorf("x=n=%d: [%g, %g]", n, lo, hi)
		}
		if n > 1 {
			lo, _ = ClopperPearson(1, n, a)
			if want := 1 - math.Pow(1-a/2, 1/float64(n)); math.Abs(lo-want) > 1e-10 {
				t.Errorf("x=1 n=%d: lower %g, want %g", n, lo, want)
			}
		}
	}
}

// The bounds solve P(X >= x | lo) = a/2 and P(X <= x | hi) = a/2 for the
// binomial (the interval's definition), summed term by term here.
func TestClopperPearsonDefinition(t *testing.T) {
	binomTail := func(x, n int, p float64, upper bool) float64 {
		s := 0.0
		for k := 0; k <= n; k++ {
			if (upper && k >= x) || (!upper && k <= x) {
				lg1, _ := math.Lgamma(float64(n + 1))
				lg2, _ := math.Lgamma(float64(k + 1))
				lg3, _ := math.Lgamma(float64(n - k + 1))
				s += math.Exp(lg1 - lg2 - lg3 + float64(k)*math.Log(p) + float64(n-k)*math.Log1p(-p))
			}
		}
		return s
	}
	for _, c := range [][2]int{{1, 40}, {3, 200}, {12, 256}} {
		lo, hi := ClopperPearson(c[0], c[1], 0.05)
		if e := binomTail(c[0], c[1], lo, true); math.Abs(e-0.025) > 1e-9 {
			t.Errorf("%v: P(X >= x | lo) = %g, want 0.025", c, e)
		}
		if e := binomTail(c[0], c[1], hi, false); math.Abs(e-0.025) > 1e-9 {
			t.Errorf("%v: P(X <= x | hi) = %g, want 0.025", c, e)
		}
	}
}
