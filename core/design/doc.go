// Package design builds the first-level design matrix of one fMRI run from
// its task timing, TR and volume count: HRF-convolved condition regressors
// (optionally with temporal and dispersion derivatives and parametric
// modulators), confounds, a discrete cosine drift basis and an intercept.
// The formulas are those of the project's methods notes, sections a (HRF),
// b (drift), c.1 (rank) and n (confounds); the sources are cited below.
//
// # Kernel
//
// The canonical haemodynamic response is the double gamma
//
//	h(t) = g(t; 6, 1) − g(t; 16, 1)/6,   0 ≤ t ≤ 32 s,
//
// g(t; a, b) being the gamma density of shape a and scale b seconds: a
// positive lobe peaking at 4.9985 s and an undershoot of minimum at 15.749 s
// (common practice, no single source). [HRF] is h, [HRFIntegral] its running
// integral Hc, [HRFDerivative] h' and [HRFDispersion] ∂h/∂b₁, the derivative
// with respect to the first gamma's scale. Hc uses the closed form of the
// regularised lower incomplete gamma for integer shape,
// P(a, x) = 1 − e^−x Σ_{k<a} x^k/k!, and below x = a the equivalent series
// e^−x Σ_{k≥a} x^k/k!, so that no digits cancel.
//
// In the design every HRF-based column uses the kernel divided by its
// integral over [0, 32] s, [HRFArea] ≈ 0.8334: a sustained block of
// amplitude 1 settles at 1, so an effect is the response per unit of
// sustained stimulus in data units. A zero-duration event is an impulse of
// unit area, peaking at 0.1754/0.8334 ≈ 0.21.
//
// # Events to regressors: exact, no time grid
//
// An event (onset o, duration d, amplitude a) is the boxcar a·1[o ≤ s < o+d].
// Its regressor is the continuous convolution with h, which has the closed
// form a·[Hc(t−o) − Hc(t−o−d)] for d > 0 and a·h(t−o) for d = 0; the
// derivative columns have closed forms of the same shape ([AddRegressor]).
// This is exact (an infinitely fine time resolution): onsets and durations
// are honoured to the last bit, whatever the TR, and nothing is
// interpolated. [AddRegressorGrid] implements the fine-grid alternative
// (stimulus on bins of TR/16 or finer, convolved with per-bin kernel
// integrals); the tests use it to show that the two agree.
//
// # Sample times (slice-timing reference)
//
// Scan k (0-based) is sampled at t_k = (k + f)·TR. f is
// [Options.SampleFraction]; nil means 0.5, the middle of the volume, which
// keeps the worst slice mismatch of a multislice acquisition within ±TR/2.
// For data slice-time corrected to a reference slice acquired s seconds into
// the TR, set f = s/TR. Onsets are seconds from the start of the first
// volume and may be negative.
//
// # Columns
//
// In order:
//
//  1. for each condition: its canonical regressor, named by the condition;
//     with [Options.HRFDerivs], "NAME_deriv" (temporal) and "NAME_disp"
//     (dispersion), Gram–Schmidt orthogonalised over the scan samples, the
//     temporal against the canonical and the dispersion against both, so
//     only the canonical β changes meaning (common practice); then for each
//     of [Options.Modulate] that the condition carries, "NAME_x_MOD", whose
//     event amplitudes are the modulator minus its mean over the condition's
//     events (n/a events get 0 and are left out of the mean);
//  2. the confounds, in order, each mean-centred (n/a values set to 0
//     first), under their own names;
//  3. the drift cosines "cosine_01" … "cosine_K": the orthonormal DCT-II
//     vectors sqrt(2/n)·cos(π j (2k+1)/(2n)), j = 1..K, K = ⌊2·n·TR/T_c⌋
//     for cutoff period T_c ([Options.HighpassSec]; 0 means none);
//  4. "intercept", a column of ones.
//
// A column that is all zero (a condition without events in reach of the
// run, a modulator constant within its condition, a constant confound) is
// dropped with a warning, so a contrast naming it later finds an unknown
// name. Any other rank deficiency is an error naming a minimal set of
// dependent columns ([CollinearError]). The rank is the usual numerical
// rank of the columns scaled to unit norm: singular values below
// max(n, p)·s_max·2.2e−16 count as zero (common practice).
//
// # Sources
//
// Gamma-function identities: the Poisson–gamma relation between the
// incomplete gamma of integer shape and the Poisson cdf (standard, from
// memory). DCT-II basis: the orthonormal type-II discrete cosine transform
// (common practice). Check values in the tests come from scipy 1.10.1
// (scipy.stats.gamma, scipy.fft.idct); see testdata/design/README.md.
package design
