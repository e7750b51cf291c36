package infer

import (
	"strings"
	"testing"
)

func TestWarnings(t *testing.T) {
	smooth := [3]float64{4, 4, 4}
	if w := Warnings(MethodFWERFT, 0.001, smooth); len(w) != 0 {
		t.Errorf("fwe-rft at FWHM 4: %q", w)
	}
	// Eklund et al. 2016: loose cluster-forming threshold under parametric cluster inference.
	w := Warnings(MethodClusterRFT, 0.01, smooth)
	if len(w) != 1 || !strings.HasPrefix(w[0], "cluster-forming threshold p=0.01 is looser than 0.001: ") ||
		!strings.Contains(w[0], "Eklund, Nichols & Knutsson 2016, PNAS") {
		t.Errorf("cluster-rft at 0.01: %q", w)
	}
	if w := Warnings(MethodClusterRFT, 0.001, smooth); len(w) != 0 {
		t.Errorf("cluster-rft at 0.001: %q", w)
	}
	// Low smoothness (Nichols & Hayasaka 2003): geometric mean of (2, 2, 4) is 2.52 < 3.
	w = Warnings(MethodFWERFT, 0.001, [3]float64{2, 2, 4})
	if len(w) != 1 || !strings.Contains(w[0], "2.52 voxels FWHM") || !strings.Contains(w[0], "Nichols & Hayasaka 2003") {
		t.Errorf("fwe-rft at low smoothness: %q", w)
	}
	if w := Warnings(MethodClusterRFT, 0.01, [3]float64{2, 2, 2}); len(w) != 2 {
		t.Errorf("cluster-rft, loose and rough: %q", w)
	}
	if w := Warnings(MethodBonferroni, 0.01, [3]float64{1, 1, 1}); len(w) != 0 {
		t.Errorf("bonferroni needs no smoothness: %q", w)
	}
	w = Warnings(MethodNone, 0.001, smooth)
	if len(w) != 1 || !strings.Contains(w[0], "uncorrected") {
		t.Errorf("none: %q", w)
	}
	if w := Warnings(MethodFWERFT, 0.001, [3]float64{0, -1, 0}); len(w) != 1 || !strings.Contains(w[0], "could not be estimated") {
		t.Errorf("no smoothness: %q", w)
	}
}
