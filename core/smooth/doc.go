// Package smooth implements separable Gaussian smoothing of 3D volumes, normalised within a
// mask (methods notes §e).
//
// The FWHM in mm becomes a standard deviation per array axis, σ = FWHM / sqrt(8 ln 2) / Δ,
// with Δ the voxel spacing along that axis (the norm of the affine's column, supplied by the
// caller). The 1D kernel is exp(−d²/(2σ²)) for |d| ≤ floor(4σ + 0.5), normalised to sum 1: the
// same truncation rule as the common 1D Gaussian filters (truncate = 4). Filtering is three 1D
// passes. Inside the mask m the result is S(y·m)/S(m), so the brain edge is not darkened by
// the zeros outside; outside the mask it is 0. Axes with σ < 0.3 voxel are not filtered.
package smooth
