// Package phantom generates winnow's built-in synthetic demo scenario,
// "lantern": a single invented task-fMRI run with a known, planted answer.
//
// The story is made up. A participant watches a flickering lantern and
// either counts its flashes (condition "count") or just watches it
// (condition "watch"); rest between blocks is implicit. Nothing here is
// derived from a real person, scan or published paradigm.
//
// What is generated (all of it deterministic from one seed):
//
//   - A head-shaped phantom on a 64×64×36 grid of 3×3×3.5 mm voxels: an
//     egg-shaped ellipsoidal head with scalp and skull shells, a cortical
//     grey-matter ribbon of varying thickness brighter than white matter,
//     a midline fissure, lateral ventricles, deep grey nuclei, a smooth
//     texture, a receive-coil brightening towards the periphery and a
//     frontal signal dropout, blurred slightly for partial volume.
//   - A block design (Scenario.EventsTSV) and the planted activation: each
//     condition's boxcar convolved with the canonical double-gamma HRF
//     h(t) = g(t;6,1) − g(t;16,1)/6 (shape/scale gamma densities, support
//     32 s), evaluated exactly through the gamma distribution function and
//     divided by its integral over [0, 32] s so that a sustained block
//     settles at 1 (winnow methods notes §a.1, §a.3 and §a.6; the kernel's
//     parameterisation is common practice). Scans are sampled at the middle
//     of each volume, (k + 0.5)·TR (§a.5).
//   - Noise: spatially smooth Gaussian noise (white noise blurred with a
//     separable Gaussian kernel of FWHM 2 voxels, renormalised to unit
//     variance), made temporally AR(1) with ρ = 0.35, with a standard
//     deviation of 1.2 % of the local baseline; a slow drift (linear plus
//     one low-frequency cosine); six smooth random-walk motion-like traces
//     (Scenario.ConfoundsTSV) with a small intensity effect tied to one of
//     them; Rician background noise outside the head. Normal deviates come
//     from one math/rand/v2 PCG stream through a 2^16-entry inverse-CDF
//     table (four deviates per 64-bit draw, truncated at ±4.3), which keeps
//     generation quick under WebAssembly.
//
// Scenario.Truth marks the voxels where count exceeds watch, the answer to
// Scenario.Contrast. Scenario.Blobs lists every planted region, including
// the shared visual response that both conditions drive. Volumes come out
// of Scenario.Stream one at a time, rounded to integers in the int16 range.
// The same seed gives the same volumes (the arithmetic is float32 without
// fused multiply-adds; amd64 and wasm give identical values).
package phantom
