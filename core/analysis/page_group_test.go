package analysis

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"strings"
	"testing"
	"time"

	"winnow/core/infer"
	"winnow/core/nifti"
)

// TestPageGroupShardsMerge: the shards of one run, encoded in memory and
// merged, give the summary and the null table one run gives (the identity
// the sharding contract states: "the result one run gives, byte for byte").
func TestPageGroupShardsMerge(t *testing.T) {
	names, files, err := DemoGroupFiles(3)
	if err != nil {
		t.Fatal(err)
	}
	for _, m := range []infer.Method{infer.MethodFWEPerm, infer.MethodClusterPerm, infer.MethodTFCE} {
		opt := GroupOptions{Correct: m, Perms: 200, Workers: 1}
		t0 := time.Now()
		whole, err := Group(context.Background(), DemoGroupInputs(names, files), opt)
		if err != nil {
			t.Fatal(err)
		}
		t.Logf("%s: one run %v", m, time.Since(t0))
		var parts [][]byte
		for k := 2; k >= 1; k-- { // any order
			o := opt
			o.Shard, o.Shards = k, 2
			r, err := Group(context.Background(), DemoGroupInputs(names, files), o)
			if err != nil {
				t.Fatal(err)
			}
			b, err := r.ShardBytes()
			if err != nil {
				t.Fatal(err)
			}
			parts = append(parts, b)
		}
		merged, err := MergeGroupShards(parts)
		if err != nil {
			t.Fatal(err)
		}
		var a, b bytes.Buffer
		whole.WriteSummary(&a)
		merged.WriteSummary(&b)
		if a.String() != b.String() {
			t.Errorf("%s: merged summary differs from one run's:\n%s\nvs\n%s", m, b.String(), a.String())
		}
		a.Reset()
		b.Reset()
		whole.NullMax.WriteTSV(&a)
		merged.NullMax.WriteTSV(&b)
		if a.String() != b.String() {
			t.Errorf("%s: merged null table differs", m)
		}
		// The plotted null agrees with the summary: under tfce the critical value is the
		// summary's stat_threshold (TFCE scale, Group's doc); under cluster-perm the
		// observed largest cluster is the first row of the table when it survives.
		nh, err := merged.NullHistogram(0, 0)
		if err != nil || nh == nil {
			t.Fatalf("%s: null histogram %v, %v", m, nh, err)
		}
		c0 := merged.Summary.Contrasts[0]
		switch m {
		case infer.MethodTFCE:
			if nh.Threshold == nil || c0.StatThreshold == nil || *nh.Threshold != *c0.StatThreshold {
				t.Errorf("tfce: plotted threshold %v, summary %v", nh.Threshold, c0.StatThreshold)
			}
		case infer.MethodClusterPerm:
			if len(c0.Clusters) == 0 {
				t.Errorf("cluster-perm: no cluster survives; the planted effect should")
			} else if nh.Observed != float64(c0.Clusters[0].Voxels) {
				t.Errorf("cluster-perm: observed largest cluster %v, table's first %d", nh.Observed, c0.Clusters[0].Voxels)
			}
		}
		// Merging the same shard twice, or a missing one, is refused.
		if _, err := MergeGroupShards([][]byte{parts[0], parts[0]}); err == nil {
			t.Errorf("%s: a shard given twice was accepted", m)
		}
		if _, err := MergeGroupShards(parts[:1]); err == nil {
			t.Errorf("%s: a missing shard was accepted", m)
		}
		if _, err := MergeGroupShards([][]byte{[]byte("not a shard")}); err == nil {
			t.Errorf("%s: garbage was accepted", m)
		}
	}
}

// TestPageGroupDemo: the demo's planted effect is found where it was planted,
// and the null histogram's observed maximum, threshold and counts agree with
// the summary and the null table.
func TestPageGroupDemo(t *testing.T) {
	names, files, err := DemoGroupFiles(1)
	if err != nil {
		t.Fatal(err)
	}
	if len(files) != demoGroupSubjects {
		t.Fatalf("%d files, want %d", len(files), demoGroupSubjects)
	}
	r, err := Group(context.Background(), DemoGroupInputs(names, files), GroupOptions{Perms: 500, Workers: 1})
	if err != nil {
		t.Fatal(err)
	}
	c := r.Summary.Contrasts[0]
	if len(c.Clusters) == 0 {
		b, _ := json.Marshal(r.Summary)
		t.Fatalf("no cluster found in the demo: %s", b)
	}
	pk := c.Clusters[0].PeakIJK
	// The peak must lie within the planted sphere's tapered edge (by construction).
	d2 := 0
	for a := range 3 {
		d2 += (pk[a] - DemoGroupCentre[a]) * (pk[a] - DemoGroupCentre[a])
	}
	if float64(d2) > (DemoGroupRadius+1.5)*(DemoGroupRadius+1.5) {
		t.Errorf("largest cluster peak %v, want within %.1f voxels of %v", pk, DemoGroupRadius+1.5, DemoGroupCentre)
	}
	h, err := r.NullHistogram(0, 0)
	if err != nil || h == nil {
		t.Fatalf("null histogram: %v %v", h, err)
	}
	total := 0.0
	for _, n := range h.Counts {
		total += n
	}
	// Every relabelling falls in one bin (identity: counts sum to N).
	if int(total) != h.N || h.N != *r.Summary.Perms {
		t.Errorf("counts sum %v, N %d, summary perms %d", total, h.N, *r.Summary.Perms)
	}
	// fwe-perm: the critical value is the summary's stat_threshold (same rule, methods j.3).
	if h.Threshold == nil || c.StatThreshold == nil || *h.Threshold != *c.StatThreshold {
		t.Errorf("threshold %v, summary %v", h.Threshold, c.StatThreshold)
	}
	// The observed maximum is one of the relabellings (the identity), so at least one
	// maximum reaches it.
	if h.Exceed < 1 || h.Observed < h.Edges[0] || h.Observed > h.Edges[len(h.Edges)-1] {
		t.Errorf("observed %v, exceed %d, range %v..%v", h.Observed, h.Exceed, h.Edges[0], h.Edges[len(h.Edges)-1])
	}
	zh, err := r.Histogram(0, 0)
	if err != nil {
		t.Fatal(err)
	}
	if zh.N != r.Summary.MaskVoxels {
		t.Errorf("z histogram counts %d voxels, mask has %d", zh.N, r.Summary.MaskVoxels)
	}
	// The mean of the maps at the planted centre is near the planted 1.0 (noise sd
	// at most 1/sqrt(12) ≈ 0.29 after averaging; 5 sd allowed), and 0 outside the ellipsoid.
	mean, g, err := MeanOfMaps(context.Background(), DemoGroupInputs(names, files).Maps, nifti.Limits{})
	if err != nil {
		t.Fatal(err)
	}
	if v := mean[g.Index(DemoGroupCentre[0], DemoGroupCentre[1], DemoGroupCentre[2])]; v < 1-5*0.29 || v > 1+5*0.29 {
		t.Errorf("mean at the planted centre %v, want 1.0 ± 1.45", v)
	}
	if v := mean[g.Index(0, 0, 0)]; v != 0 {
		t.Errorf("mean outside the ellipsoid %v, want 0", v)
	}
}

// sameGroupResult reports where two complete group results differ: the summary's
// JSON text, the null table, and every map's name, kind and values (bit for bit).
func sameGroupResult(t *testing.T, what string, got, want *GroupResult) {
	t.Helper()
	var a, b bytes.Buffer
	got.WriteSummary(&a)
	want.WriteSummary(&b)
	if a.String() != b.String() {
		t.Errorf("%s: summary differs:\n%s\nwant\n%s", what, a.String(), b.String())
	}
	if (got.NullMax == nil) != (want.NullMax == nil) {
		t.Errorf("%s: null table %v, want %v", what, got.NullMax != nil, want.NullMax != nil)
	} else if got.NullMax != nil {
		a.Reset()
		b.Reset()
		got.NullMax.WriteTSV(&a)
		want.NullMax.WriteTSV(&b)
		if a.String() != b.String() {
			t.Errorf("%s: null table differs", what)
		}
	}
	if len(got.Maps) != len(want.Maps) {
		t.Errorf("%s: %d maps, want %d", what, len(got.Maps), len(want.Maps))
		return
	}
	for i, m := range want.Maps {
		g := got.Maps[i]
		if g.File != m.File || g.Kind != m.Kind || g.Contrast != m.Contrast || g.Write != m.Write {
			t.Errorf("%s: map %d is %s (%s), want %s (%s)", what, i, g.File, g.Kind, m.File, m.Kind)
			continue
		}
		for v := range m.Data {
			if math.Float32bits(g.Data[v]) != math.Float32bits(m.Data[v]) {
				t.Errorf("%s: %s differs at voxel %d: %v, want %v", what, m.File, v, g.Data[v], m.Data[v])
				break
			}
		}
	}
}

// TestGroupRethreshold: re-inferring a group result under new settings gives exactly
// the result of a new run with those settings (identity: the permutation null does not
// depend on alpha, and the parametric methods need only the statistic), and what needs
// maxima the run did not record is refused with a message saying to run again.
func TestGroupRethreshold(t *testing.T) {
	names, files, err := DemoGroupFiles(2)
	if err != nil {
		t.Fatal(err)
	}
	run := func(m infer.Method, alpha, clusterP float64) *GroupResult {
		t.Helper()
		r, err := Group(context.Background(), DemoGroupInputs(names, files), GroupOptions{Correct: m, Alpha: alpha, ClusterP: clusterP, Perms: 200, Workers: 1})
		if err != nil {
			t.Fatal(err)
		}
		return r
	}
	type step struct {
		m         infer.Method
		alpha, cp float64
	}
	cases := []struct {
		from  step
		to    []step // applied in turn, each compared with a new run
		wrong []step // refused
	}{
		{
			from: step{infer.MethodTFCE, 0.05, 0.001},
			to: []step{{infer.MethodTFCE, 0.01, 0.001}, {infer.MethodFWEPerm, 0.1, 0.001}, {infer.MethodFDRBH, 0.01, 0.001},
				{infer.MethodFWERFT, 0.05, 0.001}, {infer.MethodClusterRFT, 0.05, 0.01}, {infer.MethodNone, 0.001, 0.001},
				{infer.MethodTFCE, 0.02, 0.001}}, // back to tfce after other methods: the run's null is kept
			wrong: []step{{infer.MethodClusterPerm, 0.05, 0.001}},
		},
		{
			from:  step{infer.MethodClusterPerm, 0.05, 0.01},
			to:    []step{{infer.MethodClusterPerm, 0.1, 0.01}, {infer.MethodFWEPerm, 0.05, 0.01}, {infer.MethodHolm, 0.05, 0.01}},
			wrong: []step{{infer.MethodClusterPerm, 0.05, 0.001}, {infer.MethodTFCE, 0.05, 0.01}},
		},
		{
			from:  step{infer.MethodFDRBH, 0.05, 0.001},
			to:    []step{{infer.MethodFDRBH, 0.01, 0.001}, {infer.MethodBonferroni, 0.05, 0.001}, {infer.MethodFDRBY, 0.1, 0.001}},
			wrong: []step{{infer.MethodFWEPerm, 0.05, 0.001}},
		},
	}
	for _, c := range cases {
		orig := run(c.from.m, c.from.alpha, c.from.cp)
		var before bytes.Buffer
		orig.WriteSummary(&before)
		cur := orig
		for _, s := range c.to {
			what := fmt.Sprintf("%s at %g (p %g) -> %s at %g (p %g)", c.from.m, c.from.alpha, c.from.cp, s.m, s.alpha, s.cp)
			re, err := cur.Rethreshold(s.m, s.alpha, s.cp)
			if err != nil {
				t.Errorf("%s: %v", what, err)
				continue
			}
			sameGroupResult(t, what, re, run(s.m, s.alpha, s.cp))
			// The log p and z of the run's statistics do not depend on the method or alpha:
			// re-thresholding takes them over (what keeps it fast) rather than recomputing.
			if len(re.tails) == 0 || len(orig.tails) == 0 || &re.tails[0].z[0] != &orig.tails[0].z[0] || &re.tails[0].logp[0] != &orig.tails[0].logp[0] {
				t.Errorf("%s: the run's log p and z were computed again", what)
			}
			cur = re
		}
		for _, s := range c.wrong {
			_, err := cur.Rethreshold(s.m, s.alpha, s.cp)
			var ie *InputError
			if !errors.As(err, &ie) || !strings.Contains(err.Error(), "run the group analysis again") {
				t.Errorf("%s -> %s at p %g: error %v; want an input error saying to run again", c.from.m, s.m, s.cp, err)
			}
		}
		var after bytes.Buffer
		orig.WriteSummary(&after)
		if before.String() != after.String() {
			t.Errorf("%s: Rethreshold changed the result it started from", c.from.m)
		}
	}
	// Bad levels are input errors naming the flag.
	r := run(infer.MethodFWEPerm, 0.05, 0.001)
	if _, err := r.Rethreshold(infer.MethodFWEPerm, 1.5, 0.001); err == nil || !strings.Contains(err.Error(), "--alpha") {
		t.Errorf("alpha 1.5: %v; want an error naming --alpha", err)
	}
	// Zero settings keep the result's own (the page sends only what changed).
	same, err := r.Rethreshold(infer.MethodDefault, 0, 0)
	if err != nil {
		t.Fatal(err)
	}
	sameGroupResult(t, "fwe-perm rethresholded with zero settings", same, r)
}

// TestGroupNullCheckText: the group null check is worded as the relabellings it counts
// (sign flips for a one-sample test, permuted subjects for two groups), with the numbers
// of summary.null_check.
func TestGroupNullCheckText(t *testing.T) {
	names, files, err := DemoGroupFiles(2)
	if err != nil {
		t.Fatal(err)
	}
	r, err := Group(context.Background(), DemoGroupInputs(names, files), GroupOptions{Perms: 200, Workers: 1})
	if err != nil {
		t.Fatal(err)
	}
	nc := r.Summary.NullCheck
	s, w := r.NullCheckText()
	// Group's doc: with_findings of designs = N relabellings; the wording names sign flips
	// (a one-sample test of the mean, methods notes: sign flipping).
	want := fmt.Sprintf("with these settings, %d of 200 sign-flipped null sets ", nc.WithFindings)
	if nc.Designs != 200 || !strings.HasPrefix(s, want) || strings.Contains(s, "chance design") || w != "" {
		t.Errorf("one-sample null check %q, warning %q; want the prefix %q and no warning", s, w, want)
	}
	// Two groups: the subjects are permuted (Group's doc).
	in := DemoGroupInputs(names, files)
	var tsv strings.Builder
	tsv.WriteString("group\n")
	for i := range names {
		tsv.WriteString([]string{"patient\n", "control\n"}[i%2])
	}
	in.Design = &Input{Name: "design.tsv", R: strings.NewReader(tsv.String())}
	r2, err := Group(context.Background(), in, GroupOptions{Contrasts: []string{"d=patient - control"}, Perms: 200, Workers: 1})
	if err != nil {
		t.Fatal(err)
	}
	if s, _ := r2.NullCheckText(); !strings.Contains(s, "of 200 relabelled null sets (subjects permuted)") {
		t.Errorf("two-group null check %q; want relabelled null sets", s)
	}
	// A parametric result has no null check and no sentence.
	r3, err := r.Rethreshold(infer.MethodFDRBH, 0.05, 0.001)
	if err != nil {
		t.Fatal(err)
	}
	if s, w := r3.NullCheckText(); s != "" || w != "" || r3.Summary.NullCheck != nil {
		t.Errorf("fdr-bh: null check %v, text %q %q; want none", r3.Summary.NullCheck, s, w)
	}
}
