package design

import (
	"encoding/json"
	"math"
	"os"
	"testing"
)

// Tolerance tiers (see the style guide): closed forms against the reference
// set are compared at 1e-12 absolute, as hrf.json's README suggests.
const (
	tolClosedForm = 1e-12
	tolRoot       = 1e-9 // a root located by bisection against scipy brentq (xtol 1e-14)
)

type hrfFixture struct {
	TS         []float64 `json:"t_s"`
	H          []float64 `json:"h"`
	Cum        []float64 `json:"cumulative_integral"`
	DhDt       []float64 `json:"dh_dt"`
	DhDb1      []float64 `json:"dh_dscale1"`
	PeakTime   float64   `json:"peak_time_s"`
	PeakValue  float64   `json:"peak_value"`
	UnderTime  float64   `json:"undershoot_min_time_s"`
	UnderValue float64   `json:"undershoot_min_value"`
	ZeroCross  float64   `json:"zero_crossing_s"`
	Area032    float64   `json:"area_0_32"`
	AreaInf    float64   `json:"area_0_inf"`
	Normalised struct {
		PeakOne float64 `json:"peak_one_divisor"`
		AreaOne float64 `json:"area_one_divisor"`
	} `json:"normalised"`
	Example struct {
		TR      float64      `json:"TR_s"`
		N       int          `json:"n_scans"`
		Events  [][3]float64 `json:"events_onset_duration_amplitude"`
		Offset0 regFixture   `json:"frame_offset_0.0"`
		Offset5 regFixture   `json:"frame_offset_0.5"`
	} `json:"regressor_example"`
}

type regFixture struct {
	Times      []float64 `json:"times_s"`
	Canonical  []float64 `json:"canonical"`
	Temporal   []float64 `json:"temporal_derivative"`
	Dispersion []float64 `json:"dispersion_derivative"`
	FineDiff   float64   `json:"fine_grid_dt_0_001_max_abs_diff"`
}

func loadHRF(t *testing.T) *hrfFixture {
	t.Helper()
	b, err := os.ReadFile("../../testdata/design/hrf.json")
	if err != nil {
		t.Fatal(err)
	}
	var f hrfFixture
	if err := json.Unmarshal(b, &f); err != nil {
		t.Fatal(err)
	}
	if len(f.TS) != 65 || len(f.Example.Offset5.Canonical) != 40 {
		t.Fatalf("hrf.json: unexpected shape (%d samples, %d scans)", len(f.TS), len(f.Example.Offset5.Canonical))
	}
	return &f
}

// TestHRFSamples compares h, Hc, h' and ∂h/∂b₁ at t = 0, 0.5, …, 32 s with
// scipy.stats.gamma 1.10.1 (hrf.json).
func TestHRFSamples(t *testing.T) {
	f := loadHRF(t)
	for i, ts := range f.TS {
		for _, c := range []struct {
			name      string
			got, want float64
		}{
			{"h", HRF(ts), f.H[i]},
			{"Hc", HRFIntegral(ts), f.Cum[i]},
			{"dh/dt", HRFDerivative(ts), f.DhDt[i]},
			{"dh/db1", HRFDispersion(ts), f.DhDb1[i]},
		} {
			if math.Abs(c.got-c.want) > tolClosedForm {
				t.Errorf("%s(%g) = %.17g, want %.17g (hrf.json, scipy.stats.gamma)", c.name, ts, c.got, c.want)
			}
		}
	}
	// Outside the support everything is 0 (methods §a.1), and Hc stays at its area.
	for _, ts := range []float64{-1, -1e-9, 32.0000001, 40, math.NaN()} {
		if HRF(ts) != 0 || HRFDerivative(ts) != 0 || HRFDispersion(ts) != 0 {
			t.Errorf("kernel at %g is not 0", ts)
		}
	}
	if HRFIntegral(-3) != 0 || HRFIntegral(100) != HRFArea() {
		t.Errorf("Hc(-3) = %g, Hc(100) = %g; want 0 and the area", HRFIntegral(-3), HRFIntegral(100))
	}
}

// bisect finds a root of fn in [a, b], fn(a) and fn(b) of opposite signs.
func bisect(fn func(float64) float64, a, b float64) float64 {
	fa := fn(a)
	for i := 0; i < 200 && b-a > 1e-14; i++ {
		m := (a + b) / 2
		if fm := fn(m); (fm > 0) == (fa > 0) {
			a, fa = m, fm
		} else {
			b = m
		}
	}
	return (a + b) / 2
}

// TestHRFLandmarks: peak, undershoot and zero crossing against scipy brentq
// on the analytic derivative (hrf.json); areas and normalisation divisors.
func TestHRFLandmarks(t *testing.T) {
	f := loadHRF(t)
	peak := bisect(HRFDerivative, 3, 7)
	under := bisect(HRFDerivative, 10, 20)
	zero := bisect(HRF, 6, 14)
	for _, c := range []struct {
		name      string
		got, want float64
		tol       float64
	}{
		{"peak time", peak, f.PeakTime, tolRoot},
		{"peak time (methods §a.1, 7 digits)", peak, 4.998511, 5e-7},
		{"undershoot time", under, f.UnderTime, tolRoot},
		{"undershoot time (methods §a.1, 7 digits)", under, 15.74879, 5e-6},
		{"zero crossing", zero, f.ZeroCross, tolRoot},
		{"peak value", HRF(f.PeakTime), f.PeakValue, tolClosedForm},
		{"undershoot value", HRF(f.UnderTime), f.UnderValue, tolClosedForm},
		{"area over [0,32]", HRFArea(), f.Area032, tolClosedForm},
		{"area-one divisor", HRFArea(), f.Normalised.AreaOne, tolClosedForm},
		{"peak-one divisor", HRF(peak), f.Normalised.PeakOne, tolClosedForm},
		// Untruncated area 1 − 1/6: each gamma density integrates to 1.
		{"area over [0,inf)", gammaP(shapePeak, 400) - undershootRatio*gammaP(shapeUndershoot, 400), f.AreaInf, tolClosedForm},
	} {
		if math.Abs(c.got-c.want) > c.tol {
			t.Errorf("%s = %.15g, want %.15g (±%g)", c.name, c.got, c.want, c.tol)
		}
	}
}

// TestGammaP checks the two branches of the integer-shape incomplete gamma.
func TestGammaP(t *testing.T) {
	for _, a := range []int{shapePeak, shapeUndershoot} {
		// Continuity across the branch switch at x = a (identity): the
		// density there is below 0.17, so a step of 1e-9 moves P by < 2e-10.
		x := float64(a)
		if d := math.Abs(gammaP(a, x) - gammaP(a, x-1e-9)); d > 2e-10 {
			t.Errorf("P(%d, x) jumps by %g at the branch switch", a, d)
		}
		// Small x: P(a, x) = e^−x x^a/a! · (1 + x/(a+1) + x²/((a+1)(a+2)) + …)
		// (series of the lower incomplete gamma, standard, from memory); the
		// relative accuracy must survive where P is ~1e-20 or smaller.
		for _, x := range []float64{1e-3, 0.05, 0.5} {
			lead := math.Exp(-x) * math.Pow(x, float64(a)) / math.Gamma(float64(a+1))
			s, term := 0.0, 1.0
			for k := 1; k < 200; k++ {
				s += term
				term *= x / float64(a+k)
			}
			want := lead * s
			if r := math.Abs(gammaP(a, x)-want) / want; r > 1e-13 {
				t.Errorf("P(%d, %g) = %g, want %g (relative error %g)", a, x, gammaP(a, x), want, r)
			}
		}
	}
	if gammaP(6, 0) != 0 || gammaP(6, -1) != 0 || gammaP(6, 1e4) != 1 {
		t.Error("P(6, x) at 0, −1, 1e4 is not 0, 0, 1")
	}
}

// simpson integrates fn over [a, b] with n (even) panels.
func simpson(fn func(float64) float64, a, b float64, n int) float64 {
	h := (b - a) / float64(n)
	s := fn(a) + fn(b)
	for i := 1; i < n; i++ {
		w := 2.0
		if i%2 == 1 {
			w = 4
		}
		s += w * fn(a+float64(i)*h)
	}
	return s * h / 3
}

// TestHRFAntiderivatives checks identities: Hc' = h and D' = ∂h/∂b₁ by
// Simpson integration, and h' against central differences of h (methods §a.2).
func TestHRFAntiderivatives(t *testing.T) {
	for _, u := range []float64{0.7, 4, 9.25, 15.5, 31.9, 32} {
		if got, want := HRFIntegral(u), simpson(HRF, 0, u, 4000); math.Abs(got-want) > 1e-11 {
			t.Errorf("Hc(%g) = %.15g, Simpson ∫h = %.15g", u, got, want)
		}
		if got, want := dispersionIntegral(u), simpson(HRFDispersion, 0, u, 4000); math.Abs(got-want) > 1e-11 {
			t.Errorf("D(%g) = %.15g, Simpson ∫∂h/∂b₁ = %.15g", u, got, want)
		}
	}
	const e = 1e-5
	for u := 0.25; u < 31.9; u += 0.37 {
		fd := (HRF(u+e) - HRF(u-e)) / (2 * e)
		if math.Abs(fd-HRFDerivative(u)) > 1e-9 {
			t.Errorf("h'(%g) = %g, central difference %g", u, HRFDerivative(u), fd)
		}
	}
}
