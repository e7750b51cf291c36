package design

import "math"

// The kernel's parameters (methods §a.1): two gamma densities of scale 1 s,
// shapes 6 (response) and 16 (undershoot), the undershoot weighted 1/6.
const (
	shapePeak       = 6
	shapeUndershoot = 16
	undershootRatio = 1.0 / 6.0

	// HRFLength is the kernel's support in seconds: h(t) = 0 outside [0, HRFLength].
	HRFLength = 32.0
)

// poissonTerm returns e^−x·x^k/k! for x ≥ 0 and k ≥ 0, by a running product
// (no overflow for the small k used here).
func poissonTerm(x float64, k int) float64 {
	t := math.Exp(-x)
	for i := 1; i <= k; i++ {
		t *= x / float64(i)
	}
	return t
}

// gammaPDF is the gamma density of integer shape a and scale 1 at t ≥ 0:
// t^(a−1) e^−t / (a−1)!, which is the Poisson term of index a−1.
func gammaPDF(t float64, a int) float64 {
	if t <= 0 {
		return 0
	}
	return poissonTerm(t, a-1)
}

// gammaP is the regularised lower incomplete gamma P(a, x) for integer shape
// a ≥ 1 (the gamma cdf of scale 1). For integer a it has the closed form
// P(a, x) = 1 − e^−x Σ_{k<a} x^k/k! (the Poisson–gamma identity). Below the
// mean (x < a), where P is small, the equivalent tail sum e^−x Σ_{k≥a} x^k/k!
// is used instead, so that no digits cancel.
func gammaP(a int, x float64) float64 {
	if !(x > 0) {
		return 0
	}
	if x < float64(a) {
		t := poissonTerm(x, a)
		sum := 0.0
		for k := a; k < a+2000; k++ {
			sum += t
			t *= x / float64(k+1)
			if t <= sum*1e-17 {
				break
			}
		}
		return sum
	}
	t := math.Exp(-x)
	sum := t
	for k := 1; k < a; k++ {
		t *= x / float64(k)
		sum += t
	}
	return 1 - sum
}

// HRF returns the unnormalised canonical double-gamma kernel
//
//	h(t) = g(t; 6, 1) − g(t; 16, 1)/6   for 0 ≤ t ≤ 32 s, 0 otherwise,
//
// with g(t; a, b) the gamma density of shape a and scale b seconds (methods
// §a.1). t is in seconds; the value is per second. Its integral over [0, 32]
// is [HRFArea].
func HRF(t float64) float64 {
	if !(t >= 0 && t <= HRFLength) {
		return 0
	}
	return gammaPDF(t, shapePeak) - undershootRatio*gammaPDF(t, shapeUndershoot)
}

// HRFIntegral returns the running integral Hc(u) = ∫₀^min(u,32) h(s) ds of
// the unnormalised kernel: 0 for u ≤ 0, constant [HRFArea] for u ≥ 32.
// It is G(m; 6, 1) − G(m; 16, 1)/6 with m = min(u, 32) and G the gamma cdf.
func HRFIntegral(u float64) float64 {
	m := clampSupport(u)
	if m == 0 {
		return 0
	}
	return gammaP(shapePeak, m) - undershootRatio*gammaP(shapeUndershoot, m)
}

// HRFArea returns ∫₀^32 h(t) dt ≈ 0.8334433, the divisor that normalises
// the kernel so that a sustained block of amplitude 1 settles at 1 (methods §a.6).
func HRFArea() float64 { return HRFIntegral(HRFLength) }

// HRFDerivative returns the temporal derivative h'(t) of the unnormalised
// kernel on (0, 32], 0 elsewhere (h'(0) = 0):
//
//	h'(t) = g(t;6,1)·(5/t − 1) − g(t;16,1)·(15/t − 1)/6.
func HRFDerivative(t float64) float64 {
	if !(t > 0 && t <= HRFLength) {
		return 0
	}
	return gammaPDFDeriv(t, shapePeak) - undershootRatio*gammaPDFDeriv(t, shapeUndershoot)
}

// gammaPDFDeriv is d/dt g(t; a, 1) = e^−t t^(a−2) ((a−1) − t)/(a−1)! for t > 0.
func gammaPDFDeriv(t float64, a int) float64 {
	return poissonTerm(t, a-2) / float64(a-1) * (float64(a-1) - t)
}

// HRFDispersion returns the dispersion derivative of the unnormalised kernel:
// the derivative with respect to the first gamma's scale b₁ at b₁ = 1,
//
//	∂h/∂b₁ = g(t; 6, b₁)·(t/b₁² − 6/b₁) = g(t; 6, 1)·(t − 6),
//
// on [0, 32], 0 elsewhere (methods §a.2).
func HRFDispersion(t float64) float64 {
	if !(t >= 0 && t <= HRFLength) {
		return 0
	}
	return gammaPDF(t, shapePeak) * (t - shapePeak)
}

// dispersionIntegral is D(u) = ∫₀^m ∂h/∂b₁ ds = −(m/b₁)·g(m; 6, b₁) at b₁ = 1,
// m = min(max(u, 0), 32) (methods §a.3).
func dispersionIntegral(u float64) float64 {
	m := clampSupport(u)
	return -m * gammaPDF(m, shapePeak)
}

// clampSupport returns min(max(u, 0), 32); NaN gives 0.
func clampSupport(u float64) float64 {
	if !(u > 0) {
		return 0
	}
	if u > HRFLength {
		return HRFLength
	}
	return u
}
