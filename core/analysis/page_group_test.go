package analysis

import (
	"bytes"
	"context"
	"encoding/json"
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
