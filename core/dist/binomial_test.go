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
