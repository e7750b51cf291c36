package infer

import (
	"fmt"
	"math"

	"winnow/core/dist"
)

// ClusterRFT holds the random field theory quantities for cluster extent in a 3D Gaussian
// field at cluster-forming threshold U (Friston et al. 1994; methods g). Sizes are in voxels.
// For t and F maps, form clusters on the z map with U = ClusterFormingZ(p) and use these
// Gaussian results with the same resels (common practice).
type ClusterRFT struct {
	U                float64 // Gaussian cluster-forming threshold
	ExpectedClusters float64 // E[m] = Σ_d R_d ρ_d(U)
	ExpectedVoxels   float64 // E[N] = S·Φ̄(U)
	ExpectedSize     float64 // E[n] = E[N]/E[m]
	Beta             float64 // (Γ(D/2+1)/E[n])^(2/D), D = 3
}

// clusterD is the dimension of the search region.
const clusterD = 3

// ClusterFormingZ returns the Gaussian threshold for a one-sided cluster-forming p.
func ClusterFormingZ(p float64) float64 {
	if !(p > 0 && p < 1) {
		return math.NaN()
	}
	return dist.ZFromLogSF(math.Log(p))
}

// NewClusterRFT computes the cluster-extent quantities for a search region with resels r and
// nVoxels in-mask voxels, at Gaussian threshold u.
func NewClusterRFT(r Resels, nVoxels int, u float64) (*ClusterRFT, error) {
	if nVoxels <= 0 {
		return nil, fmt.Errorf("infer: %d voxels in the search region, want at least 1", nVoxels)
	}
	if math.IsNaN(u) || math.IsInf(u, 0) {
		return nil, fmt.Errorf("infer: cluster-forming threshold z = %g, want a finite number", u)
	}
	if !reselsOK(r) {
		return nil, fmt.Errorf("infer: resel counts %v are not finite (smoothness estimate missing?)", [4]float64(r))
	}
	c := &ClusterRFT{U: u}
	c.ExpectedClusters = ExpectedEC(r, Field{Kind: FieldZ}, u)
	if !(c.ExpectedClusters > 0) {
		return nil, fmt.Errorf("infer: cluster-forming threshold z = %.4g gives %.3g expected clusters, want > 0 (threshold too low for this search region)", u, c.ExpectedClusters)
	}
	c.ExpectedVoxels = float64(nVoxels) * math.Exp(dist.NormLogSF(u))
	c.ExpectedSize = c.ExpectedVoxels / c.ExpectedClusters
	g, _ := math.Lgamma(clusterD/2.0 + 1)
	c.Beta = math.Exp((g - math.Log(c.ExpectedSize)) * 2 / clusterD)
	return c, nil
}

// PSizeAtLeast returns P(n >= k) = exp(-β k^(2/D)), the chance that one cluster has at least k
// voxels.
func (c *ClusterRFT) PSizeAtLeast(k float64) float64 {
	if k <= 0 {
		return 1
	}
	return math.Exp(-c.Beta * math.Pow(k, 2.0/clusterD))
}

// P returns the corrected p of a cluster of k voxels: 1 - exp(-E[m]·P(n >= k)), the chance of
// at least one cluster that large (Poisson clumping).
func (c *ClusterRFT) P(k float64) float64 {
	return -math.Expm1(-c.ExpectedClusters * c.PSizeAtLeast(k))
}

// KCrit returns the critical cluster size in voxels at alpha: clusters of more than KCrit
// voxels have P <= alpha. It is 0 when E[m] <= -ln(1-alpha) (every cluster passes).
func (c *ClusterRFT) KCrit(alpha float64) float64 {
	if !(alpha > 0 && alpha < 1) {
		return math.NaN()
	}
	l := -math.Log1p(-alpha)
	if c.ExpectedClusters <= l {
		return 0
	}
	return math.Pow(math.Log(c.ExpectedClusters/l)/c.Beta, clusterD/2.0)
}
