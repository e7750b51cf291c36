//go:build !js && !wasip1

package main

// A smoke test of the harness at tiny sizes: the synthetic run is a valid
// NIfTI run whose automatic mask finds the "head", the in-process figures
// are measured, and the JSON and Markdown have the shape interface.md
// ("Benchmarks") fixes. It checks no timing.

import (
	"bytes"
	"context"
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"winnow/core/analysis"
	"winnow/core/nifti"
)

func TestMeetsTarget(t *testing.T) {
	// The targets are written as "<= x" / ">= x" in interface.md's examples.
	cases := []struct {
		target string
		v      float64
		want   bool
	}{
		{"<= 1.1", 1.1, true}, {"<= 1.1", 1.1000001, false}, {">= 0.5", 0.49, false},
		{">= 2", 2, true}, {"< 50", 50, false}, {"> 5", 5.5, true},
	}
	for _, c := range cases {
		got, err := meetsTarget(c.target, c.v)
		if err != nil || got != c.want {
			t.Errorf("meetsTarget(%q, %g) = %v, %v; want %v", c.target, c.v, got, err, c.want)
		}
	}
	if _, err := meetsTarget("about 2", 1); err == nil {
		t.Error("a target without an operator was accepted")
	}
}

func TestStats(t *testing.T) {
	// Median of an even count is the mean of the middle two (common practice).
	med, lo, hi, ok := stats([]float64{4, 1, math.NaN(), 3, 2})
	if !ok || med != 2.5 || lo != 1 || hi != 4 {
		t.Errorf("stats = %v %v %v %v; want 2.5 1 4 true", med, lo, hi, ok)
	}
	if _, _, _, ok := stats([]float64{math.Inf(1)}); ok {
		t.Error("stats of no finite value reported ok")
	}
}

// The generated run must be a readable int16 run whose automatic mask (the
// pipeline's own) keeps most of the bright ellipsoid: the fit figures rely
// on a sizeable brain.
func TestSyntheticRunMask(t *testing.T) {
	spec := runSpec{Dims: [3]int{24, 24, 16}, VoxelMM: [3]float64{3, 3, 3}, Volumes: 48, TR: 2, Seed: 3}
	sr, err := generateRun(t.TempDir(), spec)
	if err != nil {
		t.Fatal(err)
	}
	// (π/6)·0.9·0.95·0.9 = 0.403 of the grid lies inside the ellipsoid; on a
	// coarse grid the voxel count is within a few percent of that.
	if sr.HeadFraction < 0.36 || sr.HeadFraction > 0.44 {
		t.Errorf("head fraction %.3f, want about 0.40", sr.HeadFraction)
	}
	f, err := os.Open(sr.Bold)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	r, err := nifti.NewReader(f, nifti.Limits{})
	if err != nil {
		t.Fatal(err)
	}
	h := r.Header()
	if h.Datatype != nifti.Int16 || h.NumVolumes() != spec.Volumes || h.DataBytes() != spec.DataBytes() {
		t.Errorf("header: %s, %d volumes, %d bytes; want int16, %d, %d", h.Datatype, h.NumVolumes(), h.DataBytes(), spec.Volumes, spec.DataBytes())
	}
	open := func(p string) analysis.Input {
		b, err := os.ReadFile(p)
		if err != nil {
			t.Fatal(err)
		}
		return analysis.Input{Name: filepath.Base(p), R: bytes.NewReader(b), Size: int64(len(b))}
	}
	conf := open(sr.Confounds)
	res, err := analysis.Fit(context.Background(), analysis.FitInputs{Bold: open(sr.Bold), Events: open(sr.Events), Confounds: &conf},
		analysis.FitOptions{Contrasts: []string{sr.Contrast}})
	if err != nil {
		t.Fatal(err)
	}
	grid := spec.voxels()
	if m := res.Summary.MaskVoxels; float64(m) < 0.3*float64(grid) || float64(m) > 0.45*float64(grid) {
		t.Errorf("automatic mask has %d of %d voxels; want about 40 %% (the ellipsoid)", m, grid)
	}
	// The planted effect (2 % of baseline against noise of sd 15 at ~1000)
	// should make the pattern > control contrast find something.
	if len(res.Summary.Contrasts) != 1 || len(res.Summary.Contrasts[0].Clusters) == 0 {
		t.Errorf("no cluster for %s; the planted sphere should survive", sr.Contrast)
	}
}

func TestSmokeJSON(t *testing.T) {
	cfg := smokeConfig()
	cfg.Clock = "cpu"
	cfg.Run.Seed = 1
	cfg.Dir = t.TempDir()
	cfg.JSONPath = filepath.Join(cfg.Dir, "bench.json")
	root, err := moduleRoot()
	if err != nil {
		t.Fatal(err)
	}
	cfg.Root = root
	cfg.Skip = map[string]string{}
	inProcess := map[string]bool{"ingest_vs_gunzip": true, "tfce_exact_speedup": true, "group_perm_seconds": true}
	for _, n := range figureNames() {
		if !inProcess[n] {
			cfg.Skip[n] = "not run in the smoke test"
		}
	}
	rep, err := measureAll(context.Background(), cfg)
	if err != nil {
		t.Fatal(err)
	}

	b, err := os.ReadFile(cfg.JSONPath)
	if err != nil {
		t.Fatal(err)
	}
	var doc map[string]any
	if err := json.Unmarshal(b, &doc); err != nil {
		t.Fatal(err)
	}
	// interface.md: {"machine": "...", "figures": [{"name", "value", "unit", "target", "meets"}]}.
	if m, ok := doc["machine"].(string); !ok || m == "" {
		t.Errorf("machine = %v, want a non-empty string", doc["machine"])
	}
	for _, k := range []string{"date", "inputs"} {
		if _, ok := doc[k]; !ok {
			t.Errorf("key %q missing", k)
		}
	}
	figs, ok := doc["figures"].([]any)
	if !ok || len(figs) != len(figureSpecs) {
		t.Fatalf("figures = %v, want %d entries", doc["figures"], len(figureSpecs))
	}
	for i, fi := range figs {
		f := fi.(map[string]any)
		name := f["name"]
		if name != figureSpecs[i].name {
			t.Errorf("figure %d is %v, want %s (the stable order)", i, name, figureSpecs[i].name)
		}
		for _, k := range []string{"name", "value", "unit", "target", "meets", "min", "max", "runs", "note"} {
			if _, ok := f[k]; !ok {
				t.Errorf("%v: key %q missing", name, k)
			}
		}
		v, isNum := f["value"].(float64)
		switch {
		case inProcess[name.(string)]:
			if !isNum || !(v > 0) {
				t.Errorf("%v: value %v, want a positive ratio", name, f["value"])
			}
			want, _ := meetsTarget(f["target"].(string), v)
			if f["meets"] != want {
				t.Errorf("%v: meets %v, want %v for %g against %v", name, f["meets"], want, v, f["target"])
			}
			if lo, hi := f["min"].(float64), f["max"].(float64); !(lo <= v && v <= hi) {
				t.Errorf("%v: value %g outside [min %g, max %g]", name, v, lo, hi)
			}
		default:
			if f["value"] != nil || f["meets"] != nil || f["note"] != "not run in the smoke test" {
				t.Errorf("%v: value %v, meets %v, note %q; want null, null and the reason", name, f["value"], f["meets"], f["note"])
			}
		}
	}

	// The Markdown table has a header, a rule and one row per figure.
	var md bytes.Buffer
	writeMarkdown(&md, rep)
	rows := 0
	for _, line := range strings.Split(md.String(), "\n") {
		if strings.HasPrefix(line, "| `") {
			rows++
		}
	}
	if rows != len(figureSpecs) {
		t.Errorf("markdown has %d figure rows, want %d:\n%s", rows, len(figureSpecs), md.String())
	}
	// --from re-prints a saved file.
	var out, errb bytes.Buffer
	if code := run([]string{"--from", cfg.JSONPath}, &out, &errb); code != 0 || !strings.Contains(out.String(), "ingest_vs_gunzip") {
		t.Errorf("--from: exit %d, stdout %q, stderr %q", code, out.String(), errb.String())
	}
}
