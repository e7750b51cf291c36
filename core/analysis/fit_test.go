package analysis

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"winnow/core/infer"
	"winnow/core/nifti"
	"winnow/core/phantom"
)

// The demo is invented data: these tests check that the pipeline finds what
// the generator planted (the ground-truth map shipped beside it), and that
// nothing is found far from it under a corrected threshold.
func TestFitFindsPlantedActivation(t *testing.T) {
	if testing.Short() {
		t.Skip("end-to-end fit of the demo run")
	}
	files, err := DemoFiles(1)
	if err != nil {
		t.Fatal(err)
	}
	_, truth, err := nifti.ReadImage(bytes.NewReader(files["truth.nii.gz"]), nifti.Limits{})
	if err != nil {
		t.Fatal(err)
	}
	res, err := Fit(context.Background(), DemoInputs(files), FitOptions{Contrasts: []string{DemoContrast(1)}})
	if err != nil {
		t.Fatal(err)
	}
	c := res.Summary.Contrasts[0]
	if c.Correction != "fwe-rft" || c.StatThreshold == nil {
		t.Fatalf("correction %q threshold %v", c.Correction, c.StatThreshold)
	}
	if len(c.Clusters) == 0 {
		t.Fatal("no cluster survived on the demo run")
	}
	thr := res.MapOf(0, "thresholded").Data
	var hit, falsePos, planted int
	for i, v := range thr {
		if truth[i] > 0 {
			planted++
		}
		if v == 0 {
			continue
		}
		if truth[i] > 0 {
			hit++
		} else if !nearTruth(truth, res.Grid.Dims, i, 2) {
			falsePos++
		}
	}
	t.Logf("planted %d voxels; surviving %d, inside truth %d, more than 2 voxels away from it %d; df %.1f, FWHM %.2v mm",
		planted, c.SurvivingVoxels, hit, falsePos, res.Summary.DF, res.Summary.FWHMmm)
	// Each planted region of at least 2 % signal change holds surviving voxels.
	for _, b := range phantom.New(1).Blobs {
		if !b.InTruth || b.Percent[0]-b.Percent[1] < 2 {
			continue
		}
		n := 0
		for i, v := range thr {
			ijk := [3]int{i % res.Grid.Dims[0], i / res.Grid.Dims[0] % res.Grid.Dims[1], i / (res.Grid.Dims[0] * res.Grid.Dims[1])}
			w := res.Grid.World(float64(ijk[0]), float64(ijk[1]), float64(ijk[2]))
			if v != 0 && math.Hypot(math.Hypot(w[0]-b.MM[0], w[1]-b.MM[1]), w[2]-b.MM[2]) <= b.RadiusMM {
				n++
			}
		}
		t.Logf("%s (%g %%): %d surviving voxels of %d planted", b.Name, b.Percent[0]-b.Percent[1], n, b.Voxels)
		if n == 0 {
			t.Errorf("planted region %s: no surviving voxel", b.Name)
		}
	}
	if falsePos > 0 {
		t.Errorf("%d surviving voxels lie more than 2 voxels from any planted one", falsePos)
	}
	// Every cluster's peak lies in or next to the truth.
	for _, cl := range c.Clusters {
		i := res.Grid.Index(cl.PeakIJK[0], cl.PeakIJK[1], cl.PeakIJK[2])
		if !nearTruth(truth, res.Grid.Dims, i, 1) {
			t.Errorf("cluster peak %v is not at a planted voxel", cl.PeakIJK)
		}
	}

	// Re-thresholding without a refit: uncorrected p < 0.001 finds at least
	// as much as the corrected threshold.
	if err := res.Rethreshold(infer.MethodNone, 0.001, 0.001); err != nil {
		t.Fatal(err)
	}
	if got := res.Summary.Contrasts[0].SurvivingVoxels; got < c.SurvivingVoxels {
		t.Errorf("uncorrected 0.001 keeps %d voxels, fewer than fwe-rft's %d", got, c.SurvivingVoxels)
	}
	if res.Summary.Contrasts[0].Corrected {
		t.Error("method none is marked corrected")
	}
}

func nearTruth(truth []float32, dims [3]int, idx, r int) bool {
	i, j, k := idx%dims[0], idx/dims[0]%dims[1], idx/(dims[0]*dims[1])
	for dk := -r; dk <= r; dk++ {
		for dj := -r; dj <= r; dj++ {
			for di := -r; di <= r; di++ {
				a, b, c := i+di, j+dj, k+dk
				if a < 0 || b < 0 || c < 0 || a >= dims[0] || b >= dims[1] || c >= dims[2] {
					continue
				}
				if truth[a+dims[0]*(b+dims[1]*c)] > 0 {
					return true
				}
			}
		}
	}
	return false
}

func TestWriteDirLeavesCompleteOutput(t *testing.T) {
	if testing.Short() {
		t.Skip("end-to-end fit of the demo run")
	}
	files, err := DemoFiles(2)
	if err != nil {
		t.Fatal(err)
	}
	res, err := Fit(context.Background(), DemoInputs(files), FitOptions{Contrasts: []string{DemoContrast(2), "both=count, watch"}, Correct: infer.MethodFDRBH})
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	if err := res.WriteDir(dir); err != nil {
		t.Fatal(err)
	}
	raw, err := os.ReadFile(filepath.Join(dir, "summary.json"))
	if err != nil {
		t.Fatal(err)
	}
	var s map[string]any
	if err := json.Unmarshal(raw, &s); err != nil {
		t.Fatal(err)
	}
	// Keys fixed by the interface contract.
	for _, k := range []string{"tool", "dims", "voxel_mm", "tr_s", "mask_voxels", "df", "fwhm_mm", "resels", "perms", "warnings", "null_check", "motion", "contrasts"} {
		if _, ok := s[k]; !ok {
			t.Errorf("summary.json lacks %q", k)
		}
	}
	cons := s["contrasts"].([]any)
	if len(cons) != 2 {
		t.Fatalf("%d contrasts", len(cons))
	}
	for _, c := range cons {
		m := c.(map[string]any)
		for _, k := range []string{"name", "kind", "correction", "alpha", "stat_threshold", "z_threshold", "surviving_voxels", "clusters", "maps"} {
			if _, ok := m[k]; !ok {
				t.Errorf("contrast lacks %q", k)
			}
		}
		for _, f := range m["maps"].(map[string]any) {
			if _, err := os.Stat(filepath.Join(dir, f.(string))); err != nil {
				t.Error(err)
			}
		}
	}
	if cons[1].(map[string]any)["kind"] != "F" {
		t.Error("a two-row contrast is not an F contrast")
	}
	entries, _ := os.ReadDir(dir)
	for _, e := range entries {
		if strings.Contains(e.Name(), "partial") {
			t.Errorf("left a temporary file %s", e.Name())
		}
	}
	if _, err := os.Stat(filepath.Join(dir, "design.tsv")); err != nil {
		t.Error(err)
	}
	html, err := os.ReadFile(filepath.Join(dir, "report.html"))
	if err != nil {
		t.Fatal(err)
	}
	for _, want := range []string{"not a medical device", "SHA-256", res.Summary.Inputs[0].SHA256, "data:image/png;base64,", "count-watch"} {
		if !strings.Contains(string(html), want) {
			t.Errorf("report.html lacks %q", want)
		}
	}
	if strings.Contains(string(html), "http://") || strings.Contains(string(html), "https://") {
		t.Error("report.html refers to an outside address")
	}
}

func TestFitRejectsBadInput(t *testing.T) {
	files, err := DemoFiles(3)
	if err != nil {
		t.Fatal(err)
	}
	cut := files["bold.nii.gz"][:len(files["bold.nii.gz"])/2]
	shortConf := []byte(strings.Join(strings.Split(string(files["confounds.tsv"]), "\n")[:20], "\n"))
	cases := []struct {
		name string
		edit func(*FitInputs, *FitOptions)
		want string
	}{
		{"unknown condition", func(in *FitInputs, o *FitOptions) { o.Contrasts = []string{"x=count - nothing"} }, `"nothing"`},
		{"truncated run", func(in *FitInputs, o *FitOptions) { in.Bold = bytesInput("bold.nii.gz", cut) }, "bold.nii.gz"},
		{"confound rows", func(in *FitInputs, o *FitOptions) {
			c := bytesInput("confounds.tsv", shortConf)
			in.Confounds = &c
		}, "confounds.tsv"},
		{"group method", func(in *FitInputs, o *FitOptions) { o.Correct = infer.MethodFWEPerm }, "--correct"},
		{"bad alpha", func(in *FitInputs, o *FitOptions) { o.Alpha = 2 }, "--alpha"},
		{"events not a table", func(in *FitInputs, o *FitOptions) { in.Events = bytesInput("events.tsv", []byte("hello\n")) }, "events.tsv"},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			in := DemoInputs(files)
			opt := FitOptions{Contrasts: []string{DemoContrast(3)}}
			tc.edit(&in, &opt)
			_, err := Fit(context.Background(), in, opt)
			var ie *InputError
			if !errors.As(err, &ie) {
				t.Fatalf("got %v, want an InputError", err)
			}
			if !strings.Contains(err.Error(), tc.want) || strings.Contains(err.Error(), "\n") {
				t.Errorf("error %q should be one line naming %s", err, tc.want)
			}
		})
	}
}

// With realignment in the pass, the motion figures and motion.tsv come out
// with the fit. The demo run holds no motion, so framewise displacement stays
// at the noise level (the recovery of known motion is tested in core/motion).
func TestFitWithRealignment(t *testing.T) {
	if testing.Short() {
		t.Skip("end-to-end fit of the demo run")
	}
	files, err := DemoFiles(4)
	if err != nil {
		t.Fatal(err)
	}
	res, err := Fit(context.Background(), DemoInputs(files), FitOptions{Contrasts: []string{DemoContrast(4)}, Realign: true})
	if err != nil {
		t.Fatal(err)
	}
	m := res.Summary.Motion
	if m == nil {
		t.Fatal("no motion figures")
	}
	if m.MaxFDmm > 0.3 || m.MeanFDmm > m.MaxFDmm {
		t.Errorf("motion figures %+v on a run without motion", m)
	}
	if lines := strings.Count(string(res.MotionTSV), "\n"); lines != 161 {
		t.Errorf("motion.tsv has %d lines, want a header and 160 rows", lines)
	}
	if len(res.Summary.Contrasts[0].Clusters) == 0 {
		t.Error("no cluster survived after realignment")
	}
}
