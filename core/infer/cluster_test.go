package infer

import (
	"fmt"
	"math"
	"strings"
	"testing"
)

// Friston et al. 1994 cluster-extent table of ec_rft.json (box 40×40×30, Gaussian field).
// The reference p_corrected is 1 - exp(-x) in double precision, which has absolute error
// ~1e-16; ours uses -expm1(-x), so tiny p are compared with an extra 1e-15 absolute slack.
func TestClusterReference(t *testing.T) {
	r := loadEC(t)
	mask := make([]bool, 40*40*30)
	for i := range mask {
		mask[i] = true
	}
	lc := CountLattice(mask, [3]int{40, 40, 30})
	for _, row := range r.Cluster.Rows {
		R := lc.Resels([3]float64{row.FWHM, row.FWHM, row.FWHM})
		u := ClusterFormingZ(row.CDP)
		if rel(u, row.U) > 1e-12 {
			t.Errorf("cluster-forming z for p=%g: %.17g, reference %.17g", row.CDP, u, row.U)
		}
		c, err := NewClusterRFT(R, lc.P, u)
		if err != nil {
			t.Fatal(err)
		}
		name := func(s string) string { return fmt.Sprintf("%s at FWHM %g, p %g", s, row.FWHM, row.CDP) }
		check := func(what string, got, want float64) {
			if math.Abs(got-want) > 1e-10*math.Abs(want)+1e-15 {
				t.Errorf("%s = %.17g, reference %.17g", name(what), got, want)
			}
		}
		check("E[m]", c.ExpectedClusters, row.EM)
		check("E[N]", c.ExpectedVoxels, row.EN)
		check("E[n]", c.ExpectedSize, row.En)
		check("beta", c.Beta, row.Beta)
		for i, k := range row.K {
			check("P(n>=k)", c.PSizeAtLeast(k), row.PSize[i])
			check("p_cluster", c.P(k), row.PCorr[i])
		}
		check("k_crit", c.KCrit(0.05), row.KCrit005)
		// At k_crit the cluster p is alpha.
		if kc := c.KCrit(0.05); kc > 0 && rel(c.P(kc), 0.05) > 1e-10 {
			t.Errorf("%s: P(k_crit) = %g", name("k_crit"), c.P(kc))
		}
	}
	// Quick numbers quoted in methods g: FWHM 3, p 0.001 -> E[m] 15.80, E[n] 3.04, k_crit 31.4.
	c, _ := NewClusterRFT(lc.Resels([3]float64{3, 3, 3}), lc.P, ClusterFormingZ(0.001))
	if math.Abs(c.ExpectedClusters-15.80) > 0.005 || math.Abs(c.ExpectedSize-3.04) > 0.005 || math.Abs(c.KCrit(0.05)-31.4) > 0.05 {
		t.Errorf("methods g anchors: %+v k_crit %g", c, c.KCrit(0.05))
	}
	if _, err := NewClusterRFT(Resels{1, 10, 100, 1000}, 1000, 0); err == nil || !strings.Contains(err.Error(), "expected clusters") {
		t.Errorf("u = 0 (E[m] < 0 for a large region): err %v", err)
	}
	if _, err := NewClusterRFT(Resels{1, 10, 100, 1000}, 0, 3); err == nil {
		t.Error("empty region accepted")
	}
}
