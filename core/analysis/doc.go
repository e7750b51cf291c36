// Package analysis is the one pipeline that both fronts (the command line in
// core/cmd/winnow and the browser worker in wasm/) call, so they cannot drift.
//
// # First level
//
// [Fit] reads a 4D run once, front to back:
//
//	events + TR + volumes -> design matrix (package design)
//	contrast SPECs        -> weight rows (package contrast)
//	bold stream           -> [optional smoothing] -> per-voxel sums (package glm)
//	sums                  -> OLS, AR(1) coefficient, whitened GLS, smoothness
//	per contrast          -> effect, SE, t or F, ln p, z (package dist)
//	                      -> corrected threshold (package infer) -> clusters (package cluster)
//
// Nothing holds a volumes x voxels array: the only per-voxel state is the
// accumulators of package glm, for the voxels of the analysis mask.
//
// # Analysis mask
//
// Unless the caller gives a mask image, the mask is computed from the first
// volume (winnow's method): voxels whose value exceeds 30 % of the first
// volume's 98th percentile, opened morphologically (erode one voxel, keep the
// largest 26-connected component, dilate back within the thresholded set) to
// cut thin bridges to the scalp, with enclosed holes filled.
// Voxels that hold a non-finite value in any volume, and voxels with no
// variance over time, leave the mask after the pass; both are counted in the
// summary ("excluded").
//
// # Errors
//
// Problems with the caller's files or settings are returned as *[InputError],
// whose text names the file (or flag), the field, what was found and what was
// expected; the command line maps them to exit status 2, the page shows the
// same line.
package analysis
