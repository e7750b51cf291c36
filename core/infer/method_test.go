package infer

import "testing"

// The method names are the outside contract's METHOD list (interface notes, "METHOD is one
// of: ...").
func TestMethodNames(t *testing.T) {
	want := []string{"none", "bonferroni", "holm", "fdr-bh", "fdr-by", "fwe-rft", "cluster-rft",
		"fwe-perm", "cluster-perm", "tfce"}
	ms := Methods()
	if len(ms) != len(want) {
		t.Fatalf("Methods() has %d entries, want %d", len(ms), len(want))
	}
	for i, m := range ms {
		if m.String() != want[i] {
			t.Errorf("method %d is %q, want %q", i, m, want[i])
		}
		back, err := ParseMethod(want[i])
		if err != nil || back != m {
			t.Errorf("ParseMethod(%q) = %v, %v", want[i], back, err)
		}
		// Group-only: the permutation methods (interface: "for group also fwe-perm,
		// cluster-perm and tfce").
		group := i >= 7
		if m.GroupOnly() != group || m.FirstLevel() == group {
			t.Errorf("%s: GroupOnly %v FirstLevel %v", m, m.GroupOnly(), m.FirstLevel())
		}
	}
	if m, err := ParseMethod(" FWE-RFT "); err != nil || m != MethodFWERFT {
		t.Errorf("ParseMethod with case and space: %v %v", m, err)
	}
	if m, err := ParseMethod(""); err != nil || m != MethodDefault {
		t.Errorf("ParseMethod(\"\") = %v %v, want default", m, err)
	}
	if _, err := ParseMethod("fdr"); err == nil {
		t.Error("ParseMethod(\"fdr\") accepted an unknown name")
	} else if want := `correction method "fdr" is not known; want one of none, bonferroni, holm, fdr-bh, fdr-by, fwe-rft, cluster-rft, fwe-perm, cluster-perm, tfce`; err.Error() != want {
		t.Errorf("error text %q", err)
	}
	if MethodDefault.FirstLevel() || MethodDefault.GroupOnly() {
		t.Error("MethodDefault must be resolved by the caller")
	}
	if Method(99).String() != "Method(99)" || Method(99).FirstLevel() {
		t.Error("out-of-range Method")
	}
	if !MethodClusterRFT.ClusterLevel() || !MethodClusterPerm.ClusterLevel() || MethodFWERFT.ClusterLevel() {
		t.Error("ClusterLevel")
	}
}
