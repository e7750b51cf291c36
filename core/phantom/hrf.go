package phantom

import "math"

// The canonical double-gamma kernel h(t) = g(t;6,1) − g(t;16,1)/6 on
// [0, 32] s (common practice; methods notes §a.1). Both shapes are
// integers, so the gamma densities and distribution functions have closed
// forms and no special functions are needed.
const (
	hrfShapePeak  = 6
	hrfShapeUnder = 16
	hrfRatio      = 1.0 / 6
	hrfLengthSec  = 32.0
)

// gammaPDFInt is the gamma density with integer shape a and scale 1.
func gammaPDFInt(t float64, a int) float64 {
	if t <= 0 {
		return 0
	}
	lg, _ := math.Lgamma(float64(a))
	return math.Exp(float64(a-1)*math.Log(t) - t - lg)
}

// gammaCDFInt is the regularised lower incomplete gamma P(a, x) for an
// integer shape a: 1 − e^(−x) Σ_{k<a} x^k/k!, or, where that would cancel
// (x < a), the equivalent tail sum e^(−x) Σ_{k≥a} x^k/k! (methods §a.3).
func gammaCDFInt(x float64, a int) float64 {
	if x <= 0 {
		return 0
	}
	if x < float64(a) {
		lg, _ := math.Lgamma(float64(a + 1))
		term := math.Exp(float64(a)*math.Log(x) - x - lg)
		sum := term
		for k := a + 1; k < a+400; k++ {
			term *= x / float64(k)
			sum += term
			if term < 1e-17*sum {
				break
			}
		}
		return sum
	}
	term := math.Exp(-x)
	sum := term
	for k := 1; k < a; k++ {
		term *= x / float64(k)
		sum += term
	}
	return 1 - sum
}

// hrf is the unnormalised kernel h(t); zero outside [0, 32] s.
func hrf(t float64) float64 {
	if t <= 0 || t > hrfLengthSec {
		return 0
	}
	return gammaPDFInt(t, hrfShapePeak) - hrfRatio*gammaPDFInt(t, hrfShapeUnder)
}

// hrfCum is the running integral Hc(u) = ∫_0^min(u,32) h.
func hrfCum(u float64) float64 {
	if u <= 0 {
		return 0
	}
	if u > hrfLengthSec {
		u = hrfLengthSec
	}
	return gammaCDFInt(u, hrfShapePeak) - hrfRatio*gammaCDFInt(u, hrfShapeUnder)
}

// hrfArea is ∫_0^32 h, the divisor that makes a sustained block settle at 1.
func hrfArea() float64 { return hrfCum(hrfLengthSec) }

// regressor samples the exact convolution of the events' boxcars (onset,
// duration, amplitude) with h at the scan times (k + frac)·tr, unnormalised:
// a·[Hc(t−o) − Hc(t−o−d)] for d > 0 and a·h(t−o) for d = 0 (methods §a.3).
func regressor(onsets, durations, amplitudes []float64, n int, tr, frac float64) []float64 {
	x := make([]float64, n)
	for e, o := range onsets {
		d, a := durations[e], amplitudes[e]
		for k := range x {
			t := (float64(k) + frac) * tr
			if t <= o {
				continue
			}
			if d > 0 {
				x[k] += a * (hrfCum(t-o) - hrfCum(t-o-d))
			} else {
				x[k] += a * hrf(t-o)
			}
		}
	}
	return x
}

// blockRegressor is a condition's regressor with unit amplitudes, divided by
// hrfArea so that a long block's plateau is 1 (methods §a.6).
func blockRegressor(onsets, durations []float64, n int, tr float64) []float64 {
	amp := make([]float64, len(onsets))
	for i := range amp {
		amp[i] = 1
	}
	x := regressor(onsets, durations, amp, n, tr, sampleFraction)
	area := hrfArea()
	for k := range x {
		x[k] /= area
	}
	return x
}
