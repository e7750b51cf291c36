// Package nullcheck measures what pure chance yields under a user's own settings: it draws
// chance designs from the real design, fits them to the same data in the same streaming
// pass as the real fit, and counts how many of them produce a finding under the user's
// exact correction (the counting and thresholding live in package analysis, which calls
// this package). The rate of chance designs with a finding estimates the familywise error
// of the settings on this run, with an exact binomial interval.
//
// # Chance designs (Draw)
//
// A chance design keeps the conditions of the real design, each condition's event count,
// every event's duration (and its modulator values), and the minimum spacing g between
// events, measured on the real events in onset order as the smallest gap between one
// event's end and the next event's start, across conditions, floored at 0. The events are
// placed inside the span [S, E] of the real events (S the first onset, E the last end):
//
//   - random order, uniform gaps (used whenever the events fit one after the other): the
//     events are shuffled (a uniform random order over all events of all conditions), and
//     the free time F = (E − S) − Σ durations − (N − 1)·g is split into N + 1 gaps by N
//     sorted uniform draws on [0, F]; event i starts at S + u_(i) + Σ_{j<i} (d_j + g).
//     This is the uniform distribution over non-overlapping layouts with spacing at least g
//     for each order. A fully packed design (F = 0) reduces to shuffling the order of the
//     events, i.e. block-order shuffling for block designs; the same rule therefore covers
//     event-related and block designs. When such packed events tile their span and every
//     condition is modelled, each chance design is a relabelling of the real events, so
//     its columns of each basis sum to the real ones and [null | real] loses a rank: the
//     last condition then becomes the reference, its canonical and derivative columns
//     leave the chance model (the real design carries their sum), the remaining chance
//     coefficients are differences from the reference (substitute z_ref = Σ x − Σ z), and
//     only contrasts whose condition weights sum to zero per basis (comparisons such as
//     a − b) are testable, with their weights on the other conditions unchanged;
//   - independent onsets (only when the real events overlap so much that F < 0 even with
//     g = 0): each onset is uniform on [S, E − d].
//
// Draws come from math/rand/v2's PCG generator with a fixed default seed, so a run is
// reproducible. The null columns of a draw are built by design.Build with the run's own
// settings (kernel, normalisation by the kernel's area, derivatives, modulators, sample
// times), so they are formed exactly like the real condition columns. A draw is redrawn when
// design.Build rejects it or drops a column, or when any null column, regressed on every
// other column of [null | real] (columns scaled to unit norm), keeps less than
// MinTolerance = 0.1 of its norm² (variance inflation factor above 10, the usual rule of
// thumb; common practice): such a design is (near) collinear with the real one and its
// estimates would be mostly noise amplification.
//
// # Model
//
// Every chance design is fitted as [null columns | the real design X], so true activation is
// absorbed by the real conditions and does not leak into the null columns. The null columns
// are those of the conditions the contrasts use (Options.Conditions; each with all its
// columns: canonical, derivatives, modulators); the events of the other conditions are
// still placed, so the layout is that of the whole design. The user's contrasts are applied
// to the null columns by column name; a contrast that weighs a column that is not a
// condition column (confound, drift, intercept) is refused.
//
// # One streaming pass (Accumulator)
//
// With the first-sample offset y_t ← y_t − y_1 (methods notes d.5; y_1 then drops out),
// the Prais–Winsten normal equations of methods notes d.4 need, per voxel and column j,
// S_j = Σ x_tj y_t and C_j = Σ y_t (x_{t−1,j} + x_{t+1,j}) (x_0 = x_{n+1} = 0), with
// Syy = Σ y_t², Lyy = Σ y_t y_{t−1} and y_n:
//
//	X̃'X̃ = (1+ρ²) Sxx − ρ (P₁ + P₁') − ρ² (x₁x₁' + x_n x_n')
//	X̃'ỹ = (1+ρ²) S − ρ C − ρ² x_n y_n
//	ỹ'ỹ = (1+ρ²) Syy − 2ρ Lyy − ρ² y_n²
//
// The sums of the null columns are kept in float32 slabs (the sums of the real columns
// and Syy, Lyy in float64). Against explicit float64 Prais–Winsten whitening of the whole
// series the tests measure a largest relative error of t and F of about 3e−5 (baseline
// 1000, noise sd 5; the same code with float64 slabs agrees to 2e−12), negligible for
// counting chance designs with a finding. The per-volume update is a matrix product: four
// volumes are buffered (interleaved per voxel) and folded into every slab by one long
// contiguous loop per pair of slabs, over chunks of 1024 voxels that stay in cache. Under
// ordinary least squares (NewAccumulator with whiten false) only the S sums are kept.
//
// Cost: 2·K·q slab updates per voxel and volume under AR(1) (K·q under OLS), against
// about 3p + 13 for the real fit (p real columns); for K = 40 and two conditions this is
// several times the arithmetic of the real fit's pass (see the benchmarks).
//
// # Fit (Solve)
//
// At each voxel the real fit's AR(1) coefficient ρ (already regularised; 0 under ordinary
// least squares) whitens the model, exactly (no quantisation of ρ). Voxels are solved in
// chunks of 256 with every small matrix held as one slice per entry across the chunk
// (structure of arrays), so every inner loop runs over voxels. The real block G_XX = X̃'X̃
// is factored once per voxel and group of 8 designs (Cholesky, L) and shared by them;
// for each design the null block is the
// Schur complement S = G_NN − W'W with W = L⁻¹ G_XN, and with r = L⁻¹ X̃'ỹ,
// u = Ñ'ỹ − W'r and z = M⁻¹u (S = MM'): β_N = M'⁻¹z, RSS = ỹ'ỹ − r'r − z'z,
// σ² = RSS/ν with ν = n − (p + q), t = c'β_N / sqrt(σ² c'S⁻¹c) and
// F = (Cβ_N)'(C S⁻¹ C')⁻¹(Cβ_N) / (q*σ²), q* the rank of C (methods notes c.2, c.3).
//
// # Result
//
// The count x of the K designs with a finding gives the estimate x/K and the exact
// Clopper–Pearson interval (Clopper & Pearson 1934, Biometrika): lower B⁻¹(0.025; x, K−x+1)
// (0 for x = 0), upper B⁻¹(0.975; x+1, K−x) (1 for x = K), the beta quantiles found by
// bisection on gonum's regularised incomplete beta.
package nullcheck
