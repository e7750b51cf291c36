// Package infer turns statistic maps into corrected inference: the correction methods and
// their names, per-test p-value adjustment (Bonferroni, Holm, Benjamini–Hochberg,
// Benjamini–Yekutieli), random field theory for voxel-level and cluster-level familywise error,
// and the warnings that go with weak settings.
//
// Sources (winnow methods notes, sections f–i):
//
//   - Resels by lattice counting of points, edges, faces and cubes of the mask, and the
//     Euler characteristic densities of Gaussian, t and F fields: Worsley, Marrett, Neelin,
//     Vandal, Friston & Evans 1996, Human Brain Mapping, "A unified statistical approach for
//     determining significant signals in images of cerebral activation".
//   - Voxel-level threshold: solve E[χ(u)] = α; reported with the Bonferroni threshold, and the
//     lower of the two is used (common practice). RFT is conservative at low smoothness
//     (Nichols & Hayasaka 2003, Statistical Methods in Medical Research).
//   - Cluster extent: Friston, Worsley, Frackowiak, Mazziotta & Evans 1994, Human Brain Mapping,
//     "Assessing the significance of focal activations using their spatial extent". Parametric
//     cluster inference at loose cluster-forming thresholds inflates familywise error (Eklund,
//     Nichols & Knutsson 2016, PNAS, "Cluster failure").
//   - FDR: Benjamini & Hochberg 1995 (JRSS B); Benjamini & Yekutieli 2001 (Annals of
//     Statistics). Holm 1979 (Scandinavian Journal of Statistics).
//
// All p-values are carried as natural logs so that p below the smallest double still ranks
// correctly. Tail probabilities and quantiles come from package dist.
package infer
