package main

import (
	"bytes"
	"encoding/json"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// runCLI runs the command line in-process and returns status and output.
func runCLI(args ...string) (int, string, string) {
	var out, errb bytes.Buffer
	code := run(args, &out, &errb)
	return code, out.String(), errb.String()
}

func TestUsageErrors(t *testing.T) {
	cases := []struct {
		args []string
		want string
	}{
		{nil, "usage"},
		{[]string{"frobnicate"}, `unknown command "frobnicate"`},
		{[]string{"demo"}, "--out DIR is required"},
		{[]string{"demo", "--out", t.TempDir(), "--bogus"}, "bogus"},
		{[]string{"fit", "--bold", "x.nii"}, "--events is required"},
		{[]string{"info"}, "exactly one FILE"},
		{[]string{"info", "no-such-file.nii"}, "no-such-file.nii"},
		{[]string{"group"}, "--maps is required"},
		{[]string{"fit", "--bold", "x.nii", "--events", "e.tsv", "--out", "o", "--contrast", "a=a", "--null-check", "-3"}, "--null-check"},
	}
	for _, tc := range cases {
		code, _, stderr := runCLI(tc.args...)
		if code != 2 {
			t.Errorf("%v: exit %d, want 2", tc.args, code)
		}
		if !strings.Contains(stderr, tc.want) {
			t.Errorf("%v: stderr %q lacks %q", tc.args, stderr, tc.want)
		}
	}
}

func TestDemoInfoFit(t *testing.T) {
	if testing.Short() {
		t.Skip("writes and fits the demo run")
	}
	dir := filepath.Join(t.TempDir(), "demo")
	if code, _, stderr := runCLI("demo", "--out", dir); code != 0 {
		t.Fatalf("demo: exit %d: %s", code, stderr)
	}
	for _, f := range []string{"bold.nii.gz", "events.tsv", "confounds.tsv", "truth.nii.gz", "README.txt"} {
		if _, err := os.Stat(filepath.Join(dir, f)); err != nil {
			t.Error(err)
		}
	}
	// A non-empty folder is refused without --force (interface contract).
	code, _, stderr := runCLI("demo", "--out", dir)
	if code != 2 || !strings.Contains(stderr, "--force") {
		t.Errorf("demo onto a non-empty folder: exit %d, %q", code, stderr)
	}

	code, out, stderr := runCLI("info", filepath.Join(dir, "bold.nii.gz"), "--json")
	if code != 0 {
		t.Fatalf("info: exit %d: %s", code, stderr)
	}
	var info map[string]any
	if err := json.Unmarshal([]byte(out), &info); err != nil {
		t.Fatalf("info --json: %v\n%s", err, out)
	}
	for _, k := range []string{"dims", "voxel_mm", "tr_s", "datatype", "byte_order", "scl_slope", "scl_inter", "qform_code", "sform_code", "affine", "data_bytes"} {
		if _, ok := info[k]; !ok {
			t.Errorf("info --json lacks %q", k)
		}
	}
	if info["datatype"] != "int16" || info["tr_s"] != 2.0 {
		t.Errorf("info: datatype %v, tr %v", info["datatype"], info["tr_s"])
	}

	res := filepath.Join(t.TempDir(), "res")
	code, out, stderr = runCLI("fit", "--bold", filepath.Join(dir, "bold.nii.gz"), "--events", filepath.Join(dir, "events.tsv"),
		"--confounds", filepath.Join(dir, "confounds.tsv"), "--contrast", "count-watch=count - watch", "--correct", "cluster-rft",
		"--cluster-p", "0.01", "--null-check", "10", "--out", res)
	if code != 0 {
		t.Fatalf("fit: exit %d: %s", code, stderr)
	}
	// A cluster-forming threshold looser than 0.001 must be warned about.
	if !strings.Contains(stderr, "warning") || !strings.Contains(stderr, "0.001") {
		t.Errorf("no cluster-forming warning in %q", stderr)
	}
	if !strings.Contains(out, "count-watch") {
		t.Errorf("fit output %q", out)
	}
	raw, err := os.ReadFile(filepath.Join(res, "summary.json"))
	if err != nil {
		t.Fatal(err)
	}
	var s struct {
		NullCheck *struct {
			Designs      int
			WithFindings int `json:"with_findings"`
		} `json:"null_check"`
		Warnings  []string
		Contrasts []struct {
			Correction string
			Clusters   []struct {
				PCorrected *float64 `json:"p_corrected"`
			}
		}
	}
	if err := json.Unmarshal(raw, &s); err != nil {
		t.Fatal(err)
	}
	if s.Contrasts[0].Correction != "cluster-rft" || len(s.Warnings) == 0 {
		t.Errorf("summary: %+v", s)
	}
	if s.NullCheck == nil || s.NullCheck.Designs != 10 || !strings.Contains(out, "chance designs") {
		t.Errorf("null check: %+v; stderr %q", s.NullCheck, stderr)
	}
	for _, c := range s.Contrasts[0].Clusters {
		if c.PCorrected == nil || *c.PCorrected > 0.05 {
			t.Errorf("a reported cluster has corrected p %v", c.PCorrected)
		}
	}

	// Bad input: one line on stderr, exit 2, nothing written.
	bad := filepath.Join(t.TempDir(), "bad")
	code, _, stderr = runCLI("fit", "--bold", filepath.Join(dir, "bold.nii.gz"), "--events", filepath.Join(dir, "events.tsv"),
		"--contrast", "x=count - nothing", "--out", bad)
	if code != 2 || strings.Count(stderr, "\n") != 1 || !strings.Contains(stderr, `"nothing"`) {
		t.Errorf("bad contrast: exit %d, %q", code, stderr)
	}
	if _, err := os.Stat(bad); err == nil {
		t.Error("a failed fit created its output folder")
	}
}
