package infer

import (
	"cmp"
	"math"
	"slices"
)

// Adjusted is the result of a per-test adjustment of p-values.
type Adjusted struct {
	// P holds the adjusted p-values in input order, linear and clamped to 1 (they underflow
	// to 0 below the smallest double; LogP keeps them).
	P []float64
	// LogP holds ln of the adjusted p-values, in input order.
	LogP []float64
	// Rejected is the number of rejected tests (adjusted p <= alpha).
	Rejected int
	// LogPThreshold is ln of the largest rejected raw p: a test is rejected iff its ln p is
	// <= LogPThreshold. Ties at that p are all rejected. -Inf when nothing is rejected.
	LogPThreshold float64
}

// rejectSlack is the relative tolerance on the p scale with which an adjusted p equal to
// alpha up to rounding counts as rejected (so that, say, 5 × 0.01 at alpha 0.05 is rejected,
// as a reader doing the arithmetic expects).
const rejectSlack = 1e-12

// cleanLogP maps a test's ln p to the value used for ranking: NaN and positive values (not
// probabilities) rank as p = 1.
func cleanLogP(lp float64) float64 {
	if math.IsNaN(lp) || lp > 0 {
		return 0
	}
	return lp
}

// finish fills P from LogP (NaN inputs stay NaN), counts rejections and the threshold.
func finish(logp []float64, a *Adjusted, alpha float64) {
	a.P = make([]float64, len(logp))
	for i, lp := range logp {
		if math.IsNaN(lp) {
			a.LogP[i] = math.NaN()
			a.P[i] = math.NaN()
			continue
		}
		a.P[i] = math.Exp(a.LogP[i])
	}
	a.Rejected, a.LogPThreshold = Reject(logp, a.LogP, alpha)
}

// Reject applies level alpha to adjusted ln p-values adj (the LogP of an adjustment of
// logp) and returns what the adjustment reports at that level: the number of rejected
// tests and ln of the largest rejected raw p (-Inf when none), ties at it included. It
// forms no linear p-values. Adjusted ln p-values do not depend on alpha, so a caller that
// tests the same p-values at several levels keeps them and calls Reject for each.
func Reject(logp, adj []float64, alpha float64) (rejected int, logPThreshold float64) {
	la := math.Log(alpha) + rejectSlack
	logPThreshold = math.Inf(-1)
	adj = adj[:len(logp)]
	for i, lp := range logp {
		if math.IsNaN(lp) {
			continue
		}
		if adj[i] <= la {
			rejected++
			if c := cleanLogP(lp); c > logPThreshold {
				logPThreshold = c
			}
		}
	}
	// Every test at or below the threshold is rejected (ties at the largest rejected p).
	if rejected > 0 {
		n := 0
		for _, lp := range logp {
			if !math.IsNaN(lp) && cleanLogP(lp) <= logPThreshold {
				n++
			}
		}
		rejected = n
	}
	return rejected, logPThreshold
}

// order returns the indices of logp sorted by ascending (cleaned) ln p; ties keep input order.
func order(logp []float64) []int32 {
	type entry struct {
		v float64
		i int32
	}
	e := make([]entry, len(logp))
	for i, lp := range logp {
		e[i] = entry{cleanLogP(lp), int32(i)}
	}
	slices.SortFunc(e, func(a, b entry) int {
		if a.v != b.v {
			return cmp.Compare(a.v, b.v)
		}
		return cmp.Compare(a.i, b.i)
	})
	idx := make([]int32, len(logp))
	for r := range e {
		idx[r] = e[r].i
	}
	return idx
}

// Bonferroni adjusts ln p-values: p̃ = min(1, m·p) with m = len(logp); reject p̃ <= alpha.
// NaN entries count among the m tests, are never rejected and get a NaN adjusted p.
func Bonferroni(logp []float64, alpha float64) Adjusted {
	a := Adjusted{LogP: make([]float64, len(logp))}
	lm := math.Log(float64(len(logp)))
	for i, lp := range logp {
		a.LogP[i] = math.Min(0, lm+cleanLogP(lp))
	}
	finish(logp, &a, alpha)
	return a
}

// Holm adjusts ln p-values by Holm's step-down procedure: with p sorted ascending,
// p̃_(i) = max_{j<=i} min(1, (m-j+1) p_(j)).
func Holm(logp []float64, alpha float64) Adjusted {
	return HolmOrdered(logp, order(logp), alpha)
}

// Order returns the indices of logp sorted by ascending p (ties by index):
// the order Holm, BH and BY work in. A caller that adjusts the same p-values
// at several levels computes it once and uses the Ordered variants.
func Order(logp []float64) []int32 { return order(logp) }

// HolmOrdered is Holm with ord = Order(logp) given.
func HolmOrdered(logp []float64, ord []int32, alpha float64) Adjusted {
	a := Adjusted{LogP: make([]float64, len(logp))}
	m := len(logp)
	run := math.Inf(-1)
	for r, i := range ord {
		v := math.Min(0, math.Log(float64(m-r))+cleanLogP(logp[i]))
		run = math.Max(run, v)
		a.LogP[i] = run
	}
	finish(logp, &a, alpha)
	return a
}

// BH adjusts ln p-values by the Benjamini–Hochberg step-up procedure (FDR at q = alpha):
// p̃_(i) = min_{j>=i} min(1, m p_(j) / j).
func BH(logp []float64, alpha float64) Adjusted {
	return stepUp(logp, order(logp), alpha, 0)
}

// BHOrdered is BH with ord = Order(logp) given.
func BHOrdered(logp []float64, ord []int32, alpha float64) Adjusted {
	return stepUp(logp, ord, alpha, 0)
}

// BYOrdered is BY with ord = Order(logp) given.
func BYOrdered(logp []float64, ord []int32, alpha float64) Adjusted {
	return stepUp(logp, ord, alpha, byLogC(len(logp)))
}

// BY adjusts ln p-values by the Benjamini–Yekutieli procedure (FDR under any dependence):
// p̃_(i) = min_{j>=i} min(1, c(m) m p_(j) / j), c(m) = Σ_{i=1}^m 1/i.
func BY(logp []float64, alpha float64) Adjusted {
	return stepUp(logp, order(logp), alpha, byLogC(len(logp)))
}

// byLogC is ln c(m), c(m) = Σ_{i=1}^m 1/i.
func byLogC(m int) float64 {
	c := 0.0
	for i := m; i >= 1; i-- { // smallest terms first
		c += 1 / float64(i)
	}
	return math.Log(c)
}

func stepUp(logp []float64, idx []int32, alpha, logC float64) Adjusted {
	a := Adjusted{LogP: make([]float64, len(logp))}
	m := len(logp)
	lm := math.Log(float64(m)) + logC
	run := 0.0
	for r := m - 1; r >= 0; r-- {
		i := idx[r]
		v := math.Min(0, lm-math.Log(float64(r+1))+cleanLogP(logp[i]))
		run = math.Min(run, v)
		a.LogP[i] = run
	}
	finish(logp, &a, alpha)
	return a
}
