package dist

import (
	"fmt"

	"gonum.org/v1/gonum/mathext"
)

// BetaQuantile returns y with I_y(a, b) = prob (the regularised incomplete
// beta, gonum mathext.RegIncBeta), by bisection on [0, 1] to full double
// precision.
func BetaQuantile(a, b, prob float64) float64 {
	lo, hi := 0.0, 1.0
	for range 200 {
		mid := lo + (hi-lo)/2
		if mid <= lo || mid >= hi {
			break
		}
		if mathext.RegIncBeta(a, b, mid) < prob {
			lo = mid
		} else {
			hi = mid
		}
	}
	return lo + (hi-lo)/2
}

// ClopperPearson returns the exact two-sided interval of confidence 1 − a
// (Clopper & Pearson 1934, Biometrika) for a binomial proportion with x
// successes in n trials: the lower bound is the a/2 quantile of
// Beta(x, n − x + 1) (0 when x = 0), the upper the 1 − a/2 quantile of
// Beta(x + 1, n − x) (1 when x = n). It panics unless 0 ≤ x ≤ n, n ≥ 1 and
// 0 < a < 1 (a caller bug).
func ClopperPearson(x, n int, a float64) (lo, hi float64) {
	if n < 1 || x < 0 || x > n || !(a > 0 && a < 1) {
		panic(fmt.Sprintf("dist: Clopper–Pearson with x = %d, n = %d, a = %g", x, n, a))
	}
	lo, hi = 0, 1
	if x > 0 {
		lo = BetaQuantile(float64(x), float64(n-x+1), a/2)
	}
	if x < n {
		hi = BetaQuantile(float64(x+1), float64(n-x), 1-a/2)
	}
	return lo, hi
}
