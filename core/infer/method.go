package infer

import (
	"fmt"
	"strings"
)

// Method is a correction for multiple comparisons. The zero value, MethodDefault, means "the
// front end's default" (fwe-rft for a first-level fit, fwe-perm for a group analysis).
type Method int

// The correction methods. Their names (String, ParseMethod) are part of the outside contract.
const (
	MethodDefault     Method = iota
	MethodNone               // uncorrected, at alpha per voxel
	MethodBonferroni         // voxel-level FWE, Bonferroni
	MethodHolm               // voxel-level FWE, Holm step-down
	MethodFDRBH              // false discovery rate, Benjamini–Hochberg
	MethodFDRBY              // false discovery rate, Benjamini–Yekutieli
	MethodFWERFT             // voxel-level FWE, random field theory
	MethodClusterRFT         // cluster-extent FWE, random field theory
	MethodFWEPerm            // voxel-level FWE, permutation (max statistic); group only
	MethodClusterPerm        // cluster-extent FWE, permutation (max cluster size); group only
	MethodTFCE               // threshold-free cluster enhancement, permutation; group only
)

// methodInfo is the single table behind String, ParseMethod and the flags.
var methodInfo = [...]struct {
	name      string
	groupOnly bool
}{
	MethodDefault:     {"default", false},
	MethodNone:        {"none", false},
	MethodBonferroni:  {"bonferroni", false},
	MethodHolm:        {"holm", false},
	MethodFDRBH:       {"fdr-bh", false},
	MethodFDRBY:       {"fdr-by", false},
	MethodFWERFT:      {"fwe-rft", false},
	MethodClusterRFT:  {"cluster-rft", false},
	MethodFWEPerm:     {"fwe-perm", true},
	MethodClusterPerm: {"cluster-perm", true},
	MethodTFCE:        {"tfce", true},
}

func (m Method) valid() bool { return m >= 0 && int(m) < len(methodInfo) }

// String returns the method's name as used on the command line and in summary.json.
func (m Method) String() string {
	if !m.valid() {
		return fmt.Sprintf("Method(%d)", int(m))
	}
	return methodInfo[m].name
}

// Methods lists every method except MethodDefault, in table order.
func Methods() []Method {
	out := make([]Method, 0, len(methodInfo)-1)
	for i := range methodInfo {
		if Method(i) != MethodDefault {
			out = append(out, Method(i))
		}
	}
	return out
}

// ParseMethod reads a method name (case and surrounding space ignored). "" and "default"
// give MethodDefault.
func ParseMethod(s string) (Method, error) {
	k := strings.ToLower(strings.TrimSpace(s))
	if k == "" {
		return MethodDefault, nil
	}
	for i, info := range methodInfo {
		if info.name == k {
			return Method(i), nil
		}
	}
	names := make([]string, 0, len(methodInfo))
	for _, m := range Methods() {
		names = append(names, m.String())
	}
	return MethodDefault, fmt.Errorf("correction method %q is not known; want one of %s", s, strings.Join(names, ", "))
}

// FirstLevel reports whether the method can be used for a first-level (single-run) fit. It is
// false for MethodDefault, which the caller resolves first.
func (m Method) FirstLevel() bool {
	return m.valid() && m != MethodDefault && !methodInfo[m].groupOnly
}

// GroupOnly reports whether the method needs a group analysis (it permutes subjects).
func (m Method) GroupOnly() bool { return m.valid() && methodInfo[m].groupOnly }

// ClusterLevel reports whether the method judges clusters by their extent (its p-values are
// per cluster, not per voxel).
func (m Method) ClusterLevel() bool { return m == MethodClusterRFT || m == MethodClusterPerm }

// RFT reports whether the method uses random field theory.
func (m Method) RFT() bool { return m == MethodFWERFT || m == MethodClusterRFT }

// Uncorrected reports whether the method applies no correction (MethodNone).
func (m Method) Uncorrected() bool { return m == MethodNone }
