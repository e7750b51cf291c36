package design

import (
	"fmt"
	"math"
	"sort"
)

// Event is one stimulus: a boxcar of height Amplitude on [Onset, Onset+Duration),
// or, when Duration is 0, an impulse of area Amplitude at Onset.
type Event struct {
	Onset     float64 // seconds from the start of the first volume; may be negative
	Duration  float64 // seconds, ≥ 0; 0 is an impulse of unit area
	Amplitude float64 // 1 for an unmodulated event
}

// Basis selects the kernel a regressor is built from.
type Basis int

const (
	BasisCanonical  Basis = iota // h, [HRF]
	BasisTemporal                // h', [HRFDerivative]
	BasisDispersion              // ∂h/∂b₁, [HRFDispersion]
)

// String returns "canonical", "temporal" or "dispersion".
func (b Basis) String() string {
	switch b {
	case BasisCanonical:
		return "canonical"
	case BasisTemporal:
		return "temporal"
	case BasisDispersion:
		return "dispersion"
	}
	return fmt.Sprintf("Basis(%d)", int(b))
}

// kernel is the basis function itself (the response to an impulse).
func (b Basis) kernel(u float64) float64 {
	switch b {
	case BasisCanonical:
		return HRF(u)
	case BasisTemporal:
		return HRFDerivative(u)
	case BasisDispersion:
		return HRFDispersion(u)
	}
	panic(fmt.Sprintf("design: unknown basis %d", int(b)))
}

// antiderivative is F with F(u) = ∫_{−∞}^{u} kernel, so that a boxcar
// [o, o+d) gives F(t−o) − F(t−o−d). For the temporal basis it is h itself,
// zero beyond 32 s: the temporal regressor is then exactly the time
// derivative of the canonical one, whose running integral stops at 32 s.
func (b Basis) antiderivative(u float64) float64 {
	switch b {
	case BasisCanonical:
		return HRFIntegral(u)
	case BasisTemporal:
		return HRF(u)
	case BasisDispersion:
		return dispersionIntegral(u)
	}
	panic(fmt.Sprintf("design: unknown basis %d", int(b)))
}

// SampleTimes returns the acquisition time of each of n scans in seconds:
// scan k (0-based) is sampled at (k + f)·tr, f in [0, 1] being the fraction
// of the TR at which the modelled slice is acquired (methods §a.5).
func SampleTimes(n int, tr, f float64) []float64 {
	t := make([]float64, n)
	for k := range t {
		t[k] = (float64(k) + f) * tr
	}
	return t
}

// AddRegressor adds to dst[k] the exact response, at time times[k], of the
// events convolved with the unnormalised kernel of basis b (methods §a.3).
// There is no time grid: with Hc the running integral of the kernel, an
// event contributes a·[Hc(t−o) − Hc(t−o−d)] for d > 0 and a·h(t−o) for d = 0
// (likewise for the derivative bases with their own antiderivatives). times
// must be ascending and the same length as dst; events must have finite
// fields and Duration ≥ 0. The cost is O(events × samples within 32 s of each).
func AddRegressor(dst, times []float64, events []Event, b Basis) {
	if len(dst) != len(times) {
		panic(fmt.Sprintf("design: AddRegressor: %d outputs for %d sample times", len(dst), len(times)))
	}
	for _, ev := range events {
		if ev.Amplitude == 0 {
			continue
		}
		o, d, a := ev.Onset, ev.Duration, ev.Amplitude
		// Outside [o, o+d+32] every form below is exactly 0; the range is
		// widened by 1 s so rounding at its ends cannot drop a sample.
		lo := sort.SearchFloat64s(times, o-1)
		hi := sort.SearchFloat64s(times, o+d+HRFLength+1)
		seg := dst[lo:hi]
		ts := times[lo:hi]
		if d == 0 {
			for k, t := range ts {
				seg[k] += a * b.kernel(t-o)
			}
			continue
		}
		for k, t := range ts {
			seg[k] += a * (b.antiderivative(t-o) - b.antiderivative(t-o-d))
		}
	}
}

// maxGridBins bounds the stimulus grid of AddRegressorGrid.
const maxGridBins = 1 << 24

// AddRegressorGrid is the fine-grid alternative to [AddRegressor] (methods
// §a.4), kept to cross-check it and for stimuli that are not boxcars. The
// stimulus is laid on bins of width dt (TR/16 or finer): a boxcar puts the
// covered fraction of each bin, an impulse is split between the two bins
// whose centres bracket its onset, so its centre of mass stays at the onset.
// This is convolved with the exact integral of the kernel over each bin,
// F((j+1)dt) − F(j·dt), and output m of the discrete convolution, which
// belongs to time (m+1)·dt past the grid origin, is interpolated linearly at
// each sample time. Its error is O(dt²); see the package tests for its size.
// One exception: a sample that sees an impulse exactly 32 s after its onset
// sits on the kernel's truncation step, which a grid smears over one bin
// (AddRegressor takes the value just inside the support there).
func AddRegressorGrid(dst, times []float64, events []Event, b Basis, dt float64) error {
	if len(dst) != len(times) {
		panic(fmt.Sprintf("design: AddRegressorGrid: %d outputs for %d sample times", len(dst), len(times)))
	}
	if !(dt > 0) || math.IsInf(dt, 0) {
		return fmt.Errorf("design: grid step %g s, want a positive number of seconds", dt)
	}
	if len(times) == 0 {
		return nil
	}
	first, last := times[0], times[len(times)-1]
	// Kernel bins j = 0..nk−1 cover [0, 32] plus one bin past it (the
	// temporal basis has its step back to 0 there).
	nk := int(math.Ceil(HRFLength/dt)) + 2
	// Grid origin: early enough that every bin the samples can see exists.
	t0 := (math.Floor(first/dt) - float64(nk) - 2) * dt
	nbins := (last-t0)/dt + 4
	if nbins > maxGridBins || float64(nk) > maxGridBins {
		return fmt.Errorf("design: grid step %g s needs %.0f bins, more than %d", dt, nbins, maxGridBins)
	}
	ns := int(nbins)
	stim := make([]float64, ns)
	end := t0 + float64(ns)*dt
	for _, ev := range events {
		o, d, a := ev.Onset, ev.Duration, ev.Amplitude
		if a == 0 {
			continue
		}
		if d == 0 {
			q := (o-t0)/dt - 0.5 // in units where bin i has its centre at i
			if q < 0 || q >= float64(ns-1) {
				continue
			}
			i := int(math.Floor(q))
			w := q - float64(i)
			stim[i] += a * (1 - w) / dt
			stim[i+1] += a * w / dt
			continue
		}
		s, e := math.Max(o, t0), math.Min(o+d, end)
		if s >= e {
			continue
		}
		i0 := int(math.Floor((s - t0) / dt))
		i1 := min(int(math.Ceil((e-t0)/dt)), ns)
		for i := i0; i < i1; i++ {
			bs := t0 + float64(i)*dt
			cover := math.Min(bs+dt, e) - math.Max(bs, s)
			if cover > 0 {
				stim[i] += a * cover / dt
			}
		}
	}
	kern := make([]float64, nk)
	prev := b.antiderivative(0)
	for j := range kern {
		cur := b.antiderivative(float64(j+1) * dt)
		kern[j] = cur - prev
		prev = cur
	}
	conv := func(m int) float64 {
		s := 0.0
		for j := 0; j < nk && j <= m; j++ {
			s += stim[m-j] * kern[j]
		}
		return s
	}
	for k, t := range times {
		u := (t-t0)/dt - 1
		m := int(math.Floor(u))
		w := u - float64(m)
		if m < 0 || m+1 >= ns {
			continue
		}
		dst[k] += (1-w)*conv(m) + w*conv(m+1)
	}
	return nil
}
