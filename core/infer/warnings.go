package infer

import (
	"fmt"
	"math"
)

// LooseClusterP is the cluster-forming p above which parametric cluster inference is warned
// about.
const LooseClusterP = 0.001

// LowSmoothnessVoxels is the mean FWHM (voxels) below which RFT is warned about.
const LowSmoothnessVoxels = 3.0

// MeanFWHM returns the geometric mean of the positive, finite FWHM components (the side of
// the cube with the same resel volume), or NaN when there is none.
func MeanFWHM(fwhmVox [3]float64) float64 {
	s, n := 0.0, 0
	for _, f := range fwhmVox {
		if f > 0 && !math.IsInf(f, 1) {
			s += math.Log(f)
			n++
		}
	}
	if n == 0 {
		return math.NaN()
	}
	return math.Exp(s / float64(n))
}

// Warnings returns the warnings that go with a correction method and its settings: clusterP
// is the cluster-forming p (used by cluster methods), fwhmVox the estimated smoothness in
// voxels (used by RFT methods).
func Warnings(method Method, clusterP float64, fwhmVox [3]float64) []string {
	var w []string
	switch {
	case method == MethodNone:
		w = append(w, "no correction for multiple comparisons (--correct none): thresholds and p-values are uncorrected, per voxel")
	case method == MethodClusterRFT && clusterP > LooseClusterP:
		w = append(w, fmt.Sprintf("cluster-forming threshold p=%g is looser than %g: parametric cluster-extent "+
			"inference at such settings gave familywise error rates far above the nominal level in null data "+
			"(Eklund, Nichols & Knutsson 2016, PNAS, \"Cluster failure\"); use --cluster-p 0.001 or, for a group "+
			"analysis, cluster-perm", clusterP, LooseClusterP))
	}
	if method.RFT() {
		m := MeanFWHM(fwhmVox)
		switch {
		case math.IsNaN(m):
			w = append(w, "smoothness could not be estimated: random field theory results are not available")
		case m < LowSmoothnessVoxels && method == MethodFWERFT:
			w = append(w, fmt.Sprintf("mean smoothness is %.2f voxels FWHM, below %g: random field theory is "+
				"conservative here (Nichols & Hayasaka 2003, Statistical Methods in Medical Research); the lower of "+
				"the RFT and Bonferroni thresholds is used", m, LowSmoothnessVoxels))
		case m < LowSmoothnessVoxels:
			w = append(w, fmt.Sprintf("mean smoothness is %.2f voxels FWHM, below %g: random field theory "+
				"assumes a field much smoother than the voxel grid, and its cluster p-values are approximate here "+
				"(Nichols & Hayasaka 2003, Statistical Methods in Medical Research)", m, LowSmoothnessVoxels))
		}
	}
	return w
}
