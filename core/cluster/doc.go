// Package cluster implements connected-component labelling of suprathreshold voxels, cluster
// tables (size, peak, local maxima in world coordinates) and threshold-free cluster
// enhancement (TFCE) on 3D volumes.
//
// # Data conventions
//
// A volume is a flat slice of length nx*ny*nz with linear index i + nx*(j + ny*k), 0-based,
// x fastest (the NIfTI storage order). dims is (nx, ny, nz). The affine maps the 0-based voxel
// (i, j, k, 1) to world millimetres.
//
// # Connectivity
//
// Two voxels are neighbours under [Faces] (6) when they share a face (|Δ|₁ = 1), under [Edges]
// (18) when they also may share an edge (|Δ|₁ ≤ 2, |Δ|∞ = 1), under [Corners] (26) when
// |Δ|∞ = 1 (common practice, no source). Cluster tables in the summary use [Corners].
//
// # Labelling
//
// [Label] runs union-find over the voxels of a mask in linear index order, visiting only the
// half of the stencil that precedes the voxel, so each row is one long contiguous loop.
// Components are numbered 1..n in the order of their lowest linear index.
//
// # Cluster tables
//
// [Clusters] and [Table] list components largest first, then by peak value, then by the
// lowest linear index of the peak. The peak is the maximum voxel (a plateau resolves to the
// lowest linear index). Local maxima are voxels that are ≥ all 26 neighbours inside the same
// cluster; they are kept in decreasing order when at least MinSeparationMM (default 8 mm) away
// from every kept one, up to MaxMaxima (default 3), the peak first (common practice, no source).
//
// # TFCE
//
// TFCE (Smith & Nichols 2009, NeuroImage 44:83–98, "Threshold-free cluster enhancement") of a
// voxel v with value h_v > 0 is
//
//	TFCE(v) = ∫_0^{h_v} e(v, h)^E · h^H dh
//
// where e(v, h) is the number of voxels of the connected component of {x : stat(x) ≥ h} that
// contains v (extent in voxels). [TFCE] evaluates the integral exactly, without a step dh: the
// extent is piecewise constant in h, so a sweep over the voxels in decreasing value with a
// union-find whose nodes carry a potential w (the TFCE of a voxel is the sum of w along its path
// to the root) integrates each constant piece as size^E·(F(last) − F(h)) with
// F(h) = h^(H+1)/(H+1). The intervals of a component are closed before its size changes,
// union is by size, and path compression keeps path sums. The cost is one radix sort plus
// near-linear union-find. Before the sweep, one pass in index order finds for every voxel which
// of its already-swept neighbours are joined to each other inside its 3×3×3 cube (through swept
// cells); such neighbours are already in one component, so the sweep looks up one of each
// group, usually a single find per voxel (derived here). Under 26-connectivity most voxels are
// settled without growing groups: two face centres of the cube are neighbours unless opposite,
// so when the swept face centres are not just an opposite pair and every swept neighbour
// touches one of them, there is one group (derived here). While float32 maps have fewer than
// 2^20 voxels above zero, that pass visits the voxels above zero alone and the three cells of a
// cube row are compared with the voxel's sweep position in one 64-bit subtraction on 21-bit
// lanes (a guard bit per lane keeps the lanes apart), so a voxel's mask takes nine
// subtractions; other maps compare one cell at a time.
//
// Permutation steps need only the largest TFCE ([TFCEMax], [TFCEMaxTail]). It lies at a voxel
// swept before all of its neighbours (a local maximum): a voxel v swept after a neighbour u
// shares u's component at every level up to h_v, so TFCE(u) ≥ TFCE(v). Only those voxels' path
// sums are formed, in the same arithmetic as the map, so the maximum equals the map's maximum.
// Float32 maps (the permutation case) sort on 32-bit value keys with the voxel index packed
// alongside, three radix passes; float64 maps sort on all 64 bits, so their result is exact
// for the float64 values. [TFCEStepped] is the
// discretised form Σ_k e(v, k·dh)^E (k·dh)^H dh over k·dh ≤ h_v, kept for checks and benchmarks;
// it is biased by O(dh).
//
// The negative tail is TFCE of −stat; [TFCESigned] returns TFCE(stat) − TFCE(−stat). Voxels
// outside a mask should be passed as 0 or NaN: neither is ever suprathreshold.
//
// Recommended 3D parameters are E = 0.5, H = 2 (Smith & Nichols 2009).
//
// # Resource limits
//
// Grids are limited to 2^30 voxels (indices are int32). A [TFCEWorkspace] keeps 12 bytes per
// voxel of the grid padded by one voxel on each side, plus 64 bytes per voxel above zero (68
// for float64 maps), sized for the first map, with a quarter to spare when a later map needs
// more.
// [TFCEStepped] labels the whole grid once per level, ⌊max/dh⌋ times.
package cluster
