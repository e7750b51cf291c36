package infer

import (
	"math"
	"math/rand/v2"
	"testing"
)

// The adjusted ln p-values do not depend on alpha: Reject on the adjustment made at one
// level gives, at every other level, the count and threshold of a fresh adjustment at that
// level (the adjustments themselves are checked against R's p.adjust in adjust_test.go).
func TestRejectReusesAdjustment(t *testing.T) {
	rng := rand.New(rand.NewPCG(8, 9))
	logp := make([]float64, 3000)
	for i := range logp {
		logp[i] = math.Log(rng.Float64()) * (1 + 3*float64(i%5))
		if i%97 == 0 {
			logp[i] = math.NaN()
		}
	}
	logp[5], logp[6] = logp[4], logp[4] // ties
	ord := Order(logp)
	methods := map[string]func(float64) Adjusted{
		"bonferroni": func(a float64) Adjusted { return Bonferroni(logp, a) },
		"holm":       func(a float64) Adjusted { return HolmOrdered(logp, ord, a) },
		"fdr-bh":     func(a float64) Adjusted { return BHOrdered(logp, ord, a) },
		"fdr-by":     func(a float64) Adjusted { return BYOrdered(logp, ord, a) },
	}
	for name, adjust := range methods {
		kept := adjust(0.5).LogP
		for _, alpha := range []float64{1e-6, 0.001, 0.01, 0.05, 0.2} {
			fresh := adjust(alpha)
			n, thr := Reject(logp, kept, alpha)
			if n != fresh.Rejected || thr != fresh.LogPThreshold {
				t.Errorf("%s at %g: Reject gives %d, %g; a fresh adjustment %d, %g", name, alpha, n, thr, fresh.Rejected, fresh.LogPThreshold)
			}
		}
	}
}
