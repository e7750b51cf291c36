package analysis

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"

	"winnow/core/dist"
	"winnow/core/infer"
	"winnow/core/nifti"
	"winnow/core/report"
)

var testGrid = nifti.Grid{
	Dims:      [3]int{10, 9, 8},
	VoxelMM:   [3]float64{3, 3, 3},
	Affine:    [4][4]float64{{3, 0, 0, -15}, {0, 3, 0, -12}, {0, 0, 3, -9}, {0, 0, 0, 1}},
	SformCode: 1,
}

// groupMaps makes n effect maps of smooth-ish noise plus effect(i, v) for subject i.
func groupMaps(t *testing.T, n int, seed uint64, effect func(i, v int) float64) [][]byte {
	t.Helper()
	rng := rand.New(rand.NewPCG(seed, 99))
	g := testGrid
	nv := g.Voxels()
	var out [][]byte
	for i := range n {
		white := make([]float64, nv)
		for v := range white {
			white[v] = rng.NormFloat64()
		}
		vol := make([]float32, nv)
		nx, ny := g.Dims[0], g.Dims[1]
		for v := range vol {
			// a 2-voxel moving average along x, then y: mild smoothness
			x, y := v%nx, v/nx%ny
			s, c := white[v], 1.0
			if x > 0 {
				s += white[v-1]
				c++
			}
			if y > 0 {
				s += white[v-nx]
				c++
			}
			vol[v] = float32(s/math.Sqrt(c) + effect(i, v))
		}
		var b bytes.Buffer
		if err := nifti.WriteMap(&b, g, vol, nifti.WriteOptions{}); err != nil {
			t.Fatal(err)
		}
		out = append(out, b.Bytes())
	}
	return out
}

func mapInputs(maps [][]byte) []Input {
	var in []Input
	for i, b := range maps {
		in = append(in, bytesInput("sub-"+strconv.Itoa(i+1)+"_effect.nii.gz", b))
	}
	return in
}

// blob is 1 inside a 3×3×3 cube at (6, 5, 4).
func blob(v int) float64 {
	x, y, z := v%10, v/10%9, v/90
	if x >= 5 && x <= 7 && y >= 4 && y <= 6 && z >= 3 && z <= 5 {
		return 1
	}
	return 0
}

func TestGroupOneSample(t *testing.T) {
	n := 10
	maps := groupMaps(t, n, 1, func(i, v int) float64 { return 2.5 * blob(v) })
	res, err := Group(context.Background(), GroupInputs{Maps: mapInputs(maps)}, GroupOptions{Perms: 500, Workers: 2})
	if err != nil {
		t.Fatal(err)
	}
	s := res.Summary
	if s.Perms == nil || *s.Perms != 500 || s.TR != nil || s.DF != float64(n-1) {
		t.Fatalf("perms %v, tr %v, df %g", s.Perms, s.TR, s.DF)
	}
	c := s.Contrasts[0]
	if c.Name != "mean" || c.Correction != "fwe-perm" || c.StatThreshold == nil {
		t.Fatalf("contrast %+v", c)
	}
	// t against the textbook one-sample t (mean / (sd/√n)), voxel by voxel (common practice).
	tm := res.mapOf(0, "stat")
	var vols [][]float32
	for _, b := range maps {
		_, vol, err := nifti.ReadImage(bytes.NewReader(b), nifti.Limits{})
		if err != nil {
			t.Fatal(err)
		}
		vols = append(vols, vol)
	}
	for v := range tm.Data {
		if !res.Mask[v] {
			continue
		}
		m, ss := 0.0, 0.0
		for _, vol := range vols {
			m += float64(vol[v])
		}
		m /= float64(n)
		for _, vol := range vols {
			d := float64(vol[v]) - m
			ss += d * d
		}
		want := m / math.Sqrt(ss/float64(n-1)/float64(n))
		if math.Abs(float64(tm.Data[v])-want) > 1e-4*math.Max(1, math.Abs(want)) {
			t.Fatalf("voxel %d: t %g, want %g", v, tm.Data[v], want)
		}
	}
	// The critical value is the (k+1)-th largest null maximum, k = ⌊αN⌋ (methods j.3).
	maxima := make([]float64, len(res.NullMax.Rows))
	for j, row := range res.NullMax.Rows {
		maxima[j] = row[1]
	}
	slices.Sort(maxima)
	slices.Reverse(maxima)
	if k := int(0.05 * 500); *c.StatThreshold != maxima[k] {
		t.Errorf("stat_threshold %g, want the %d-th largest maximum %g", *c.StatThreshold, k+1, maxima[k])
	}
	// Surviving voxels: only inside the planted cube here, and most of it.
	thr := res.mapOf(0, "thresholded")
	inside, outside := 0, 0
	for v, x := range thr.Data {
		if x != 0 {
			if blob(v) == 1 {
				inside++
			} else {
				outside++
			}
		}
	}
	if inside < 14 || outside > 2 || c.SurvivingVoxels != inside+outside {
		t.Errorf("surviving: %d inside the 27-voxel effect, %d outside, summary %d", inside, outside, c.SurvivingVoxels)
	}
	if len(c.Clusters) == 0 || c.Clusters[0].PCorrected == nil || *c.Clusters[0].PCorrected > 0.05 {
		t.Errorf("clusters %+v", c.Clusters)
	}
	// The null check: relabellings above the threshold, at most ⌊αN⌋ (methods j.3).
	nc := s.NullCheck
	if nc == nil || nc.Designs != 500 || nc.WithFindings > 25 || nc.FWEEstimate != float64(nc.WithFindings)/500 {
		t.Fatalf("null check %+v", nc)
	}
	if lo, hi := dist.ClopperPearson(nc.WithFindings, 500, 0.05); nc.CI95 != [2]float64{lo, hi} {
		t.Errorf("ci95 %v", nc.CI95)
	}
}

// mapOf returns the map of the given kind for contrast c.
func (r *GroupResult) mapOf(c int, kind string) *Map {
	for i := range r.Maps {
		if r.Maps[i].Contrast == c && r.Maps[i].Kind == kind {
			return &r.Maps[i]
		}
	}
	return nil
}

func dirFiles(t *testing.T, dir string) map[string][]byte {
	t.Helper()
	entries, err := os.ReadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	out := map[string][]byte{}
	for _, e := range entries {
		b, err := os.ReadFile(filepath.Join(dir, e.Name()))
		if err != nil {
			t.Fatal(err)
		}
		out[e.Name()] = b
	}
	return out
}

func sameDirs(t *testing.T, a, b map[string][]byte, what string) {
	t.Helper()
	if len(a) != len(b) {
		t.Errorf("%s: %d files vs %d", what, len(a), len(b))
	}
	for name, x := range a {
		if !bytes.Equal(x, b[name]) {
			t.Errorf("%s: %s differs", what, name)
		}
	}
}

// TestGroupShardsMergeWorkers: shards 1/3, 2/3, 3/3 merged give the one-run output byte for
// byte, and so do 1 and 4 workers (methods j.4).
func TestGroupShardsMergeWorkers(t *testing.T) {
	n := 9
	maps := groupMaps(t, n, 2, func(i, v int) float64 { return 1.5 * blob(v) })
	var tsv strings.Builder
	tsv.WriteString("participant_id\tage\n")
	for i := range n {
		tsv.WriteString("sub-" + strconv.Itoa(i) + "\t" + strconv.Itoa(20+3*i%7) + "\n")
	}
	run := func(opt GroupOptions, dir string) {
		t.Helper()
		d := bytesInput("design.tsv", []byte(tsv.String()))
		opt.Contrasts = []string{"mean=mean", "age=age"}
		opt.Correct = infer.MethodTFCE
		opt.Perms = 120
		res, err := Group(context.Background(), GroupInputs{Maps: mapInputs(maps), Design: &d}, opt)
		if err != nil {
			t.Fatal(err)
		}
		if err := res.WriteDir(dir); err != nil {
			t.Fatal(err)
		}
	}
	tmp := t.TempDir()
	one := filepath.Join(tmp, "one")
	run(GroupOptions{Workers: 1}, one)
	four := filepath.Join(tmp, "four")
	run(GroupOptions{Workers: 4}, four)
	sameDirs(t, dirFiles(t, one), dirFiles(t, four), "workers 1 vs 4")
	var shards []string
	for k := 1; k <= 3; k++ {
		d := filepath.Join(tmp, "shard"+strconv.Itoa(k))
		run(GroupOptions{Workers: 2, Shard: k, Shards: 3}, d)
		if _, err := os.Stat(filepath.Join(d, "summary.json")); err == nil {
			t.Error("a shard wrote summary.json")
		}
		shards = append(shards, d)
	}
	merged := filepath.Join(tmp, "merged")
	res, err := MergeGroup([]string{shards[2], shards[0], shards[1]})
	if err != nil {
		t.Fatal(err)
	}
	if err := res.WriteDir(merged); err != nil {
		t.Fatal(err)
	}
	files := dirFiles(t, one)
	sameDirs(t, files, dirFiles(t, merged), "shards merged vs one run")
	for _, f := range []string{"summary.json", "null_max.tsv", "design.tsv", "mean_t.nii.gz", "mean_tfce.nii.gz", "mean_pcorr.nii.gz", "age_thresholded.nii.gz"} {
		if files[f] == nil {
			t.Errorf("%s not written", f)
		}
	}
	var s report.Summary
	if err := json.Unmarshal(files["summary.json"], &s); err != nil {
		t.Fatal(err)
	}
	if s.Perms == nil || *s.Perms != 120 || len(s.DesignColumns) != 2 || s.DesignColumns[0] != "mean" {
		t.Errorf("summary perms %v, columns %v", s.Perms, s.DesignColumns)
	}
	// A shard of another run (another seed) is refused.
	other := filepath.Join(tmp, "other")
	seed := uint64(5)
	run(GroupOptions{Workers: 2, Shard: 2, Shards: 3, Seed: &seed}, other)
	if _, err := MergeGroup([]string{shards[0], other, shards[2]}); err == nil || !strings.Contains(err.Error(), "different run") {
		t.Errorf("shard of another run: %v", err)
	}
	// Missing and duplicate shards are refused.
	if _, err := MergeGroup(shards[:2]); err == nil || !strings.Contains(err.Error(), "3/3 missing") {
		t.Errorf("missing shard: %v", err)
	}
	if _, err := MergeGroup([]string{shards[0], shards[0], shards[1], shards[2]}); err == nil || !strings.Contains(err.Error(), "twice") {
		t.Errorf("duplicate shard: %v", err)
	}
}

func TestGroupTwoSampleAndMethods(t *testing.T) {
	n := 12
	maps := groupMaps(t, n, 3, func(i, v int) float64 {
		if i < 6 {
			return 2 * blob(v)
		}
		return 0
	})
	var tsv strings.Builder
	tsv.WriteString("participant_id\tgroup\tage\n")
	for i := range n {
		g := "control"
		if i < 6 {
			g = "patient"
		}
		tsv.WriteString("sub-" + strconv.Itoa(i) + "\t" + g + "\t" + strconv.Itoa(30+(i*5)%11) + "\n")
	}
	for _, m := range []infer.Method{infer.MethodFWEPerm, infer.MethodClusterPerm, infer.MethodNone, infer.MethodFDRBH, infer.MethodFWERFT, infer.MethodBonferroni} {
		d := bytesInput("design.tsv", []byte(tsv.String()))
		res, err := Group(context.Background(), GroupInputs{Maps: mapInputs(maps), Design: &d}, GroupOptions{
			Contrasts: []string{"pvc=patient - control", "any=patient - control, age"},
			Correct:   m, Perms: 300, ClusterP: 0.01,
		})
		if err != nil {
			t.Fatalf("%v: %v", m, err)
		}
		s := res.Summary
		if got := strings.Join(s.DesignColumns, ","); got != "patient,control,age" {
			t.Fatalf("design columns %s", got)
		}
		if (s.Perms != nil) != (m == infer.MethodFWEPerm || m == infer.MethodClusterPerm) {
			t.Errorf("%v: perms %v", m, s.Perms)
		}
		c := s.Contrasts[0]
		if c.Correction != m.String() || s.Contrasts[1].Kind != "F" {
			t.Errorf("%v: %+v", m, c)
		}
		if s.DF != float64(n-3) {
			t.Errorf("df %g, want %d", s.DF, n-3)
		}
		if c.SurvivingVoxels == 0 {
			t.Errorf("%v: nothing found for a planted difference of 2 SD", m)
		}
		if m == infer.MethodClusterPerm && (c.ClusterP == nil || c.ClusterExtent == nil) {
			t.Errorf("cluster-perm: cluster_p %v, extent %v", c.ClusterP, c.ClusterExtent)
		}
		if m == infer.MethodFWERFT && !(s.FWHMmm[0] > 0 && s.Resels > 0) {
			t.Errorf("fwe-rft: fwhm %v resels %g", s.FWHMmm, s.Resels)
		}
	}
}

func TestGroupBadInput(t *testing.T) {
	maps := groupMaps(t, 6, 4, func(int, int) float64 { return 0 })
	other := testGrid
	other.Affine[0][3] += 2
	var b bytes.Buffer
	if err := nifti.WriteMap(&b, other, make([]float32, other.Voxels()), nifti.WriteOptions{}); err != nil {
		t.Fatal(err)
	}
	shifted := append(slices.Clone(maps[:5]), b.Bytes())
	cases := []struct {
		name   string
		maps   [][]byte
		design string
		opt    GroupOptions
		want   string
	}{
		{"grid", shifted, "", GroupOptions{}, "sub-6_effect.nii.gz: nifti: grid"},
		{"rows", maps, "age\n1\n2\n3\n", GroupOptions{Contrasts: []string{"age=age"}}, "design.tsv: 3 rows, want 6"},
		{"rank", maps, "a\tb\n1\t2\n2\t4\n3\t6\n1\t2\n2\t4\n5\t10\n", GroupOptions{Contrasts: []string{"a=a"}}, "design.tsv: the design is rank-deficient"},
		{"subjects", maps[:2], "x\ty\n1\t0\n2\t5\n", GroupOptions{Contrasts: []string{"x=x"}}, "--maps: 2 subjects for a model of 3 columns"},
		{"na", maps, "age\n1\nn/a\n3\n4\n5\n6\n", GroupOptions{Contrasts: []string{"age=age"}}, `line 3, column "age": missing value`},
		{"contrast", maps, "", GroupOptions{Contrasts: []string{"x=age"}}, `--contrast "x=age"`},
		{"shard", maps, "", GroupOptions{Shard: 4, Shards: 3}, "--shard"},
		{"one map", maps[:1], "", GroupOptions{}, "--maps: 1 map"},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			in := GroupInputs{Maps: mapInputs(tc.maps)}
			if tc.design != "" {
				d := bytesInput("design.tsv", []byte(tc.design))
				in.Design = &d
			}
			tc.opt.Perms = 50
			_, err := Group(context.Background(), in, tc.opt)
			var ie *InputError
			if !errors.As(err, &ie) || !strings.Contains(err.Error(), tc.want) {
				t.Errorf("error %v, want an InputError with %q", err, tc.want)
			}
		})
	}
	// Too few relabellings for alpha: a warning, and no threshold (methods j.3).
	res, err := Group(context.Background(), GroupInputs{Maps: mapInputs(maps[:4])}, GroupOptions{Perms: 5000})
	if err != nil {
		t.Fatal(err)
	}
	if *res.Summary.Perms != 16 || res.Summary.Contrasts[0].StatThreshold != nil || !strings.Contains(strings.Join(res.Summary.Warnings, "\n"), "cannot resolve alpha") {
		t.Errorf("perms %d, threshold %v, warnings %q", *res.Summary.Perms, res.Summary.Contrasts[0].StatThreshold, res.Summary.Warnings)
	}
}

func TestParseGroupDesign(t *testing.T) {
	d, err := ParseGroupDesign(strings.NewReader("participant_id,group,age\ns1,a,30\ns2,b,41\ns3,a,25\n"))
	if err != nil {
		t.Fatal(err)
	}
	if got := strings.Join(d.Names, ","); got != "a,b,age" {
		t.Fatalf("names %s", got)
	}
	if !slices.Equal(d.Columns[0], []float64{1, 0, 1}) || !slices.Equal(d.Columns[2], []float64{30, 41, 25}) {
		t.Errorf("columns %v", d.Columns)
	}
	d, err = ParseGroupDesign(strings.NewReader("age\tscore\n30\t1\n41\t0\n"))
	if err != nil {
		t.Fatal(err)
	}
	if got := strings.Join(d.Names, ","); got != "mean,age,score" || !slices.Equal(d.Columns[0], []float64{1, 1}) {
		t.Errorf("names %s, %v", got, d.Columns)
	}
	for _, bad := range []string{"a\tb\n1\n", "a\ta\n1\t2\n", "g\th\nx\ty\n", "a\n"} {
		if _, err := ParseGroupDesign(strings.NewReader(bad)); err == nil {
			t.Errorf("%q accepted", bad)
		}
	}
}

// TestGroupMapsHeldEitherWay: the maps held as float64 rows over the whole grid (no mask
// file, maps non-zero almost everywhere) and as float32 maps (with a mask file) give the
// same analysis, bit for bit, when the mask file holds what the automatic mask would (an
// identity: both copy the same float32 values into the model's float64 data), including
// the voxels left out for a non-finite value and for the same value in every map.
func TestGroupMapsHeldEitherWay(t *testing.T) {
	const n = 8
	g := testGrid
	nv := g.Voxels()
	rng := rand.New(rand.NewPCG(5, 6))
	nanV, constV := 17, 301
	var maps [][]byte
	for i := range n {
		vol := make([]float32, nv)
		for v := range vol {
			vol[v] = float32(rng.NormFloat64() + blob(v))
		}
		vol[constV] = 3
		if i == 2 {
			vol[nanV] = float32(math.NaN())
		}
		var b bytes.Buffer
		if err := nifti.WriteMap(&b, g, vol, nifti.WriteOptions{}); err != nil {
			t.Fatal(err)
		}
		maps = append(maps, b.Bytes())
	}
	ones := make([]float32, nv)
	for v := range ones {
		ones[v] = 1
	}
	var mb bytes.Buffer
	if err := nifti.WriteMap(&mb, g, ones, nifti.WriteOptions{}); err != nil {
		t.Fatal(err)
	}
	opt := GroupOptions{Correct: infer.MethodTFCE, Perms: 100, Workers: 1}
	rowsRes, err := Group(context.Background(), GroupInputs{Maps: mapInputs(maps)}, opt)
	if err != nil {
		t.Fatal(err)
	}
	mk := bytesInput("mask.nii.gz", mb.Bytes())
	mapsRes, err := Group(context.Background(), GroupInputs{Maps: mapInputs(maps), Mask: &mk}, opt)
	if err != nil {
		t.Fatal(err)
	}
	if ex := rowsRes.Summary.Excluded; ex == nil || ex.NonFinite != 1 || ex.Constant != 1 {
		t.Errorf("excluded %+v, want 1 non-finite and 1 constant voxel", ex)
	}
	// The summaries differ only in the inputs (the mask file is listed).
	rowsRes.Summary.Inputs, mapsRes.Summary.Inputs = nil, nil
	sameGroupResult(t, "maps held as float64 rows vs float32 maps", rowsRes, mapsRes)
}
