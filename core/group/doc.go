// Package group implements second-level (group) inference by permutation: the general linear
// model over subjects' effect maps, Freedman–Lane permutation and sign flipping, the null
// distributions of the maximum statistic, the maximum cluster extent and the maximum TFCE, and
// the permutation p-values, critical values and exact binomial intervals that go with them.
//
// Sources: Nichols & Holmes 2002 (Human Brain Mapping, "Nonparametric permutation tests for
// functional neuroimaging: a primer with examples"); Winkler, Ridgway, Webster, Smith & Nichols
// 2014 (NeuroImage, "Permutation inference for the general linear model"); Freedman & Lane 1983
// (Journal of Business & Economic Statistics); Phipson & Smyth 2010 (Statistical Applications in
// Genetics and Molecular Biology, "Permutation p-values should never be zero"); Smith & Nichols
// 2009 (NeuroImage, "Threshold-free cluster enhancement"); Clopper & Pearson 1934 (Biometrika).
// winnow methods notes, sections j (permutation), k (TFCE) and f.1 (smoothness).
//
// # Model and what is exchanged
//
// A [Model] is one contrast C (q×p) on a full-rank design X (n subjects × p columns). Under
// H0: Cβ = 0 the fitted part of the data lies in span(Z) with Z = X·null(C), the reduced
// (nuisance) model. Freedman–Lane: the data are reduced to the residuals R = (I − Z Z⁺)Y, the
// residuals are permuted (or sign-flipped) over subjects, and the full model is refitted. The
// observed statistic (the identity) is the ordinary least-squares t or F of the full model.
//
// The scheme is chosen from the reduced model (winnow's rule): when the constant vector lies in
// span(Z) the subjects are exchangeable under H0 and their rows are permuted ([Permutations]);
// otherwise the mean itself is under test (a one-sample test, or a group mean, possibly with
// covariates as nuisance) and each subject's map may change sign ([SignFlips]), which assumes
// errors symmetric about zero (Winkler et al. 2014).
//
// # Cheap statistics
//
// Let U be an orthonormal basis (n×r) of span(X). For a relabelling P the statistic of P·R needs
// only m = (P'U)'R (r numbers per voxel) and the invariant SS = Σ_i R_i²:
//
//	t = (k·m) / sqrt((SS − |m|²)/ν),   F = (|K m|²/q) / ((SS − |m|²)/ν),   ν = n − r
//
// with k (or the q×r rows K) fixed per contrast. For the one-sample test r = 1 and m = s'y/√n,
// which is the sign-flip form of methods j.2; for two groups the constant column of U is
// invariant under permutation and is computed once, leaving one dot product per voxel (the S₁
// form). m for a block of B relabellings is the product of a (B·r)×n matrix with the n×V data,
// evaluated in voxel chunks as long contiguous loops. A voxel whose residual sum of squares is
// ≤ 1e−12·SS gets statistic 0 in that relabelling.
//
// Sign flips only change the signs of the rows of that product, so the subjects are split into
// groups of four and, for a block of 32 relabellings at a time, the partial sums
// Σ_{i in group} ±u_ik·R_i of all 16 sign patterns of each group are tabulated per voxel
// (flipping subject j subtracts 2·u_jk·R_j from a pattern without it). Each relabelling then
// adds one table row per group: n/4 additions per voxel instead of n multiply-adds. Every
// relabelling's sum is formed in the same order whatever its block, so results do not depend
// on the number of workers or on how the index range is split. TFCE per relabelling is only its
// maximum (cluster.TFCEMaxTail, positive tail), with no map written. A worker keeps one
// float32 grid per relabelling of its block (32 for sign flips, 8 for permutations) when
// cluster or TFCE maxima are recorded.
//
// For sign flips of a single t coordinate (a one-column design: the one-sample test) the table
// sums, the statistics, the maxima and the grid values are formed per 256 voxels and
// relabelling while they are in cache. When only maxima are asked for (no per-voxel
// exceedances) and no reader of the grid looks at values ≤ 0 (the positive TFCE, a cluster
// threshold > 0), a voxel whose numerator k·m is ≤ 0 has t ≤ 0 and is left out: it gets 0
// without the division and square root, and a relabelling whose maximum statistic comes out
// ≤ 0 is recomputed in full. With MaxTFCE and no cluster maxima, the voxels whose float32 t
// is > 0 go to cluster.TFCEMaxSparse as lists (index, value) in place of a grid, so the TFCE
// reads no empty voxels. Every value is the one the full path computes, so the maxima are
// unchanged.
//
// # Relabellings
//
// There are 2^n sign flips; the unique permutations are the distinct orderings of the design's
// rows, n!/Π m_c! for rows that repeat m_c times (C(n, n₁) for two groups). When that count is
// at most the number asked, every one is done, in a fixed order (flip j negates subject i when
// bit i of j is 1; permutations in lexicographic order of the row classes numbered by first
// appearance), identity included, and p = #{j : T*_j ≥ T}/N exactly. Otherwise relabelling 0
// is the identity and relabelling j ≥ 1 is drawn from a PCG generator (math/rand/v2) seeded by
// a mix of (seed, j), redrawn when it is the identity; with N − 1 draws,
// p = (1 + #{draws ≥ T})/((N − 1) + 1) = #{j : T*_j ≥ T}/N (Phipson & Smyth 2010). Because
// relabelling j depends only on (seed, j), any slice of the index range can be computed
// anywhere (workers, shards) with identical results.
//
// # Maxima, p-values and thresholds
//
// Per relabelling the maximum over voxels of the statistic, the largest 26-connected cluster of
// {statistic ≥ u} (u the cluster-forming threshold), and the maximum exact TFCE (E = 0.5, H = 2,
// 26-connectivity; of t, or of √F) are recorded. Ties: T*_j counts as ≥ T when
// T*_j ≥ T − 1e−10·|T|. With k = ⌊α·N⌋ the critical value is the (k+1)-th largest maximum and a
// voxel passes iff its FWE p ≤ α; when k = 0 nothing can pass.
package group
