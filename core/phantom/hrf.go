package phantom

import "winnow/core/design"

// blockRegressor is a condition's response with unit amplitudes, sampled at
// the scan times (k + sampleFraction)·tr and divided by the kernel's area so
// that a long block's plateau is 1 (methods §a.6). It is the same exact
// convolution with the canonical double-gamma HRF that package design
// builds the fitted model from (methods §a.3).
func blockRegressor(onsets, durations []float64, n int, tr float64) []float64 {
	ev := make([]design.Event, len(onsets))
	for i := range onsets {
		ev[i] = design.Event{Onset: onsets[i], Duration: durations[i], Amplitude: 1}
	}
	x := make([]float64, n)
	design.AddRegressor(x, design.SampleTimes(n, tr, sampleFraction), ev, design.BasisCanonical)
	area := design.HRFArea()
	for k := range x {
		x[k] /= area
	}
	return x
}
