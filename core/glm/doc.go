// Package glm fits the voxel-wise general linear model of one fMRI run in a single streaming
// pass over the volumes (methods notes §c, §d, §f.1–f.2).
//
// An Accumulator keeps, per in-mask voxel and in float64, the sums of the series after
// subtracting the voxel's first sample (§d.5): Σy², Σy, Σ y_t y_{t−1}, X'y, Σ x_t y_{t−1},
// Σ x_{t−1} y_t, the first and last samples, and for each neighbour pair along +x, +y, +z the
// cross-products S0, S+, S− (§f.2). Fit then works from these sums alone:
//
//   - OLS β̂ = Sxx⁻¹ X'y, the residual lag-0 and lag-1 sums a0, a1 (§d.4);
//   - the AR(1) coefficient ρ̂ with the bias of the residual projection removed through the
//     2x2 matrix M of design traces (§d.3), clamped to [−0.9, 0.95], then smoothed within the
//     mask (Gaussian, 15 mm FWHM by default) because unsmoothed per-voxel coefficients inflate
//     the tails of null maps (§d.3);
//   - the Prais–Winsten GLS at that ρ from the whitened normal equations built from the sums
//     (§d.4), with one exact p x p Cholesky factorisation per voxel (no quantisation of ρ);
//     σ² = RSS/ν with ν = n − rank(X); --noise ols skips the whitening;
//   - t and F contrasts (§c.2, §c.3): t = c'β/sqrt(σ² c'(X̃'X̃)⁻¹c), F with q* = rank(C);
//     z and p are left to the caller;
//   - the smoothness (FWHM in voxels) of the standardised residuals, whitened under AR(1), from
//     the neighbour cross-products, log-correlation form with the ν/(ν+1) correction (§f.1).
//
// Layout for speed (the package runs natively and as WebAssembly, where Go's output pays a
// dispatch on every loop iteration): AddVolume gathers each volume's in-mask values once
// (contiguous); every 7 volumes the batch is interleaved chunk by chunk (8 values per voxel
// with the previous volume) and one kernel per regressor folds it into Sxy, Axy and Bxy,
// stored interleaved per voxel, in a single long loop over voxels whose body is unrolled over
// the batch. Fit solves the per-voxel p x p systems (OLS, the whitened normal equations, their
// Cholesky factors and t contrasts) for blocks of 128 voxels at once, with each matrix element
// laid out across the block, so the inner loops run over voxels rather than over p.
//
// The design must have full column rank and more rows than columns. When the constant is not
// in the design's column space the first-sample offset is undone exactly before fitting.
package glm
