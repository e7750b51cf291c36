package nullcheck

import (
	"fmt"
	"math"

	"winnow/core/dist"
	"winnow/core/report"
)

// BetaQuantile returns y with I_y(a, b) = prob (see [dist.BetaQuantile]).
func BetaQuantile(a, b, prob float64) float64 { return dist.BetaQuantile(a, b, prob) }

// ClopperPearson returns the exact two-sided 95 % interval (Clopper & Pearson 1934,
// Biometrika) of a binomial proportion with x successes in n trials (see
// [dist.ClopperPearson]). It panics unless 0 ≤ x ≤ n and n ≥ 1.
func ClopperPearson(x, n int) (lo, hi float64) {
	if n < 1 || x < 0 || x > n {
		panic(fmt.Sprintf("nullcheck: Clopper–Pearson with x = %d, n = %d", x, n))
	}
	return dist.ClopperPearson(x, n, 0.05)
}

// Record turns the count of chance designs with a finding into the summary record: the
// estimate withFindings/designs and its exact 95 % interval.
func Record(withFindings, designs int) report.NullCheck {
	lo, hi := ClopperPearson(withFindings, designs)
	return report.NullCheck{Designs: designs, WithFindings: withFindings,
		FWEEstimate: float64(withFindings) / float64(designs), CI95: [2]float64{lo, hi}}
}

// Sentence says the record for people, e.g. "with these settings, 1 of 40 chance designs
// produced a finding: about 2.5 %, 95 % interval 0.1-13 %".
func Sentence(nc report.NullCheck) string {
	verb := "produced a finding"
	if nc.WithFindings == 0 {
		verb = "produced no finding"
	}
	return fmt.Sprintf("with these settings, %d of %d chance designs %s: about %s %%, 95 %% interval %s-%s %%",
		nc.WithFindings, nc.Designs, verb, Percent(nc.FWEEstimate), Percent(nc.CI95[0]), Percent(nc.CI95[1]))
}

// Warning returns a warning when the interval's lower bound lies above alpha (the
// settings do not control the familywise error on this run), else "".
func Warning(nc report.NullCheck, alpha float64) string {
	if !(nc.CI95[0] > alpha) {
		return ""
	}
	return fmt.Sprintf("null check: %d of %d chance designs produced a finding (95 %% interval %s-%s %%), above alpha = %s %%; these settings do not control the familywise error on this run",
		nc.WithFindings, nc.Designs, Percent(nc.CI95[0]), Percent(nc.CI95[1]), Percent(alpha))
}

// Percent writes a proportion as a percentage for people: whole numbers from 10 %, one
// decimal below, "<0.1" for a positive value that would round to 0.
func Percent(p float64) string {
	v := 100 * p
	switch {
	case v == 0:
		return "0"
	case v >= 10:
		return fmt.Sprintf("%.0f", v)
	case v < 0.05:
		return "<0.1"
	}
	s := fmt.Sprintf("%.1f", v)
	if math.Abs(v-math.Round(v)) < 0.05 && v >= 1 {
		s = fmt.Sprintf("%.0f", v)
	}
	return s
}
