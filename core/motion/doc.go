// Package motion implements rigid-body realignment of an fMRI run, volume by
// volume in a single stream, and the motion quality figures computed from the
// realignment parameters.
//
// # Parameterisation
//
// A volume's motion is six numbers, Params = (tx, ty, tz, rx, ry, rz):
// translations in mm and rotations in degrees. They define the rigid map of
// reference world coordinates (mm, through the image affine) to the moving
// volume's world coordinates
//
//	x' = R (x − c) + c + t,   R = Rx(rx) · Ry(ry) · Rz(rz),
//
// where c is the world position of the centre of the voxel grid (voxel
// ((nx−1)/2, (ny−1)/2, (nz−1)/2)), t = (tx, ty, tz), and Rx, Ry, Rz are the
// right-handed rotations about the world x, y and z axes (Rx(θ) turns y
// towards z). Rotating about the grid centre rather than the world origin
// keeps the parameters independent of where the affine puts the origin and
// decouples rotations from translations for the head in the field of view.
// The point at x in the reference is found at x' in the moving volume, so a
// moving volume M is brought back onto the reference by sampling M(x') for
// every reference position x (Realigner.Resample).
//
// # Estimation
//
// Realigner.Estimate minimises the sum of squared intensity differences
// between the reference and the transformed moving volume by Gauss–Newton
// iteration in the inverse compositional form (Baker and Matthews 2004,
// "Lucas-Kanade 20 years on", IJCV 56:221–255): the Jacobian is the world
// gradient of the smoothed reference (voxel central differences mapped
// through the inverse transpose of the affine's 3×3 part) times the
// derivative of the rigid map at the identity, so the 6×6 normal matrix is
// computed once per reference; each iteration resamples the smoothed moving
// volume by trilinear interpolation at the warped sample positions, solves
// for an update Δ and composes x' ← T_p(T_Δ⁻¹(x)), reading the Euler angles
// back from the composed rotation matrix. A global intensity scale (ratio of
// the sample means) is refitted at every iteration, so a slow change in
// overall signal does not pose as motion.
//
// Both images are smoothed with an isotropic Gaussian (σ in mm, default the
// mean voxel spacing, i.e. about one voxel) and sampled at every second voxel
// inside a head mask of the reference (smoothed reference above a tenth of
// the mean head intensity). A coarse level runs first on the volumes averaged
// over 2×2×2 voxel blocks (σ doubled in mm, every second voxel of the coarse
// grid); it widens the capture range for sudden movements, and its
// tolerance is ten times looser since the fine level sets the precision (a
// coarse level that does not converge hands its estimate to the fine level,
// whose convergence alone decides). A volume has
// converged when the last update moves no point of a 50 mm sphere by more
// than Options.TolMM (1e−3 mm by default), measured as
// |Δt|₁ + 50 mm·|Δθ|₁ (θ in radians); a volume that has not converged within
// Options.MaxIter iterations gives an *EstimateError naming the volume.
// Each volume starts from the previous volume's estimate.
//
// # Resampling
//
// Realigner.Resample evaluates the moving volume at the transformed positions
// by cubic B-spline interpolation: the volume is prefiltered along each axis
// by the recursive filter with pole z = √3 − 2 and mirror boundaries (Unser,
// Aldroubi and Eden 1993, IEEE TSP 41:821–848 and 834–848; Unser 1999, IEEE
// Signal Processing Magazine 16(6):22–38), then the separable cubic B-spline
// kernel is evaluated at the 4×4×4 neighbours. Positions outside the moving
// volume are clamped to its edge (edge extension) rather than set to zero.
//
// # Quality figures
//
// Framewise displacement follows Power et al. 2012 (NeuroImage
// 59:2142–2154): FD_t = |Δtx| + |Δty| + |Δtz| + 50 mm · (|Δrx| + |Δry| + |Δrz|)
// with the rotation differences in radians (arc length on a 50 mm sphere) and
// FD_0 = 0. Summarise reports the mean over the n−1 frame-to-frame
// differences, the maximum and the number of volumes above a threshold
// (0.5 mm by default, common practice). TaskCorrelation reports the largest
// absolute Pearson correlation between any motion parameter and any task
// regressor, warning above 0.3 (common practice): motion locked to the task
// is not removed by motion regressors without removing task signal too, and
// can produce false activation at edges of the brain.
package motion
