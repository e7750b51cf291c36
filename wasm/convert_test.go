package main

import (
	"bytes"
	"context"
	"encoding/binary"
	"errors"
	"math"
	"strings"
	"testing"

	"gonum.org/v1/gonum/mat"

	"winnow/core/analysis"
	"winnow/core/glm"
	"winnow/core/infer"
)

// A Float32Array's bytes are IEEE 754 binary32 in little-endian order on
// every WebAssembly host (the WebAssembly core spec fixes little-endian
// memory); 1.0 is 0x3f800000 and -2.5 is 0xc0200000 (IEEE 754 encoding).
func TestFloat32Bytes(t *testing.T) {
	b := float32Bytes([]float32{1, -2.5, float32(math.NaN())})
	if len(b) != 12 {
		t.Fatalf("len %d, want 12", len(b))
	}
	if got := binary.LittleEndian.Uint32(b[0:]); got != 0x3f800000 {
		t.Errorf("1.0 -> %#x, want 0x3f800000", got)
	}
	if got := binary.LittleEndian.Uint32(b[4:]); got != 0xc0200000 {
		t.Errorf("-2.5 -> %#x, want 0xc0200000", got)
	}
	if v := math.Float32frombits(binary.LittleEndian.Uint32(b[8:])); !math.IsNaN(float64(v)) {
		t.Errorf("NaN -> %v", v)
	}
}

// 1.0 as binary64 is 0x3ff0000000000000 (IEEE 754 encoding).
func TestFloat64Bytes(t *testing.T) {
	b := float64Bytes([]float64{1, 0.1})
	if got := binary.LittleEndian.Uint64(b); got != 0x3ff0000000000000 {
		t.Errorf("1.0 -> %#x", got)
	}
	if got := math.Float64frombits(binary.LittleEndian.Uint64(b[8:])); got != 0.1 {
		t.Errorf("0.1 round trip -> %v", got)
	}
}

func TestBoolBytes(t *testing.T) {
	got := boolBytes([]bool{true, false, true})
	if string(got) != "\x01\x00\x01" {
		t.Errorf("got %v", got)
	}
}

// Row-major order: element (r, c) at r*cols + c, also for a view whose
// stride exceeds its width.
func TestDenseRows(t *testing.T) {
	big := mat.NewDense(3, 4, []float64{
		1, 2, 3, 4,
		5, 6, 7, 8,
		9, 10, 11, 12,
	})
	view := big.Slice(1, 3, 1, 3).(*mat.Dense) // [[6 7] [10 11]], stride 4
	rows, cols, data := denseRows(view)
	if rows != 2 || cols != 2 {
		t.Fatalf("dims %dx%d, want 2x2", rows, cols)
	}
	want := []float64{6, 7, 10, 11}
	for i := range want {
		if data[i] != want[i] {
			t.Fatalf("data %v, want %v", data, want)
		}
	}
}

func TestAffineRows(t *testing.T) {
	a := [4][4]float64{{3, 0, 0, -90}, {0, 3, 0, -126}, {0, 0, 3.5, -72}, {0, 0, 0, 1}}
	got := affineRows(a)
	if len(got) != 16 || got[3] != -90 || got[10] != 3.5 || got[15] != 1 {
		t.Errorf("got %v", got)
	}
}

// The settings map onto analysis options with the same spellings as the
// command line (interface.md: --correct METHOD, --noise ar1|ols).
func TestSettingsFitOptions(t *testing.T) {
	hp := 100.0
	s := Settings{Contrasts: []string{"a-b=a - b"}, Correct: "fdr-bh", Alpha: 0.01, ClusterP: 0.005, SmoothMM: 6, Highpass: &hp, Noise: "ols", TR: 2}
	o, err := s.FitOptions()
	if err != nil {
		t.Fatal(err)
	}
	if o.Correct != infer.MethodFDRBH || o.Noise != glm.NoiseOLS || o.Alpha != 0.01 || o.ClusterP != 0.005 ||
		o.SmoothMM != 6 || o.HighpassSec == nil || *o.HighpassSec != 100 || o.TR != 2 || len(o.Contrasts) != 1 {
		t.Errorf("options %+v", o)
	}
	// Zero settings mean the documented defaults, decided by analysis.
	o, err = Settings{}.FitOptions()
	if err != nil || o.Correct != infer.MethodDefault || o.Noise != glm.NoiseDefault || o.HighpassSec != nil {
		t.Errorf("zero settings: %+v, %v", o, err)
	}
	if o, _ := (Settings{Noise: "ar1"}).FitOptions(); o.Noise != glm.NoiseAR1 {
		t.Errorf("ar1 -> %v", o.Noise)
	}

	for _, c := range []struct {
		s    Settings
		want string
	}{
		{Settings{Correct: "best"}, "correct: "},
		{Settings{Noise: "ar2"}, `noise: "ar2", want ar1 or ols`},
	} {
		_, err := c.s.FitOptions()
		var ie *analysis.InputError
		if !errors.As(err, &ie) || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%+v: err %v, want an InputError containing %q", c.s, err, c.want)
		}
	}
}

func TestSettingsRethreshold(t *testing.T) {
	m, a, p, err := Settings{}.Rethreshold()
	if err != nil || m != infer.MethodFWERFT || a != analysis.DefaultAlpha || p != analysis.DefaultClusterP {
		t.Errorf("defaults: %v %v %v %v", m, a, p, err)
	}
	m, a, p, err = Settings{Correct: "cluster-rft", Alpha: 0.01, ClusterP: 0.01}.Rethreshold()
	if err != nil || m != infer.MethodClusterRFT || a != 0.01 || p != 0.01 {
		t.Errorf("cluster-rft: %v %v %v %v", m, a, p, err)
	}
}

func TestViewMaps(t *testing.T) {
	maps := []analysis.Map{{Kind: "mean"}, {Kind: "mask"}, {Kind: "z"}, {Kind: "stat"}, {Kind: "effect"}, {Kind: "thresholded"}, {Kind: "rho"}}
	kinds := func(ms []analysis.Map) string {
		var s []string
		for _, m := range ms {
			s = append(s, m.Kind)
		}
		return strings.Join(s, ",")
	}
	if got := kinds(viewMaps(maps, false)); got != "mean,z,stat,thresholded" {
		t.Errorf("full: %s", got)
	}
	if got := kinds(viewMaps(maps, true)); got != "thresholded" {
		t.Errorf("partial: %s", got)
	}
}

func TestSettingsRealign(t *testing.T) {
	opt, err := Settings{Realign: true}.FitOptions()
	if err != nil || !opt.Realign {
		t.Errorf("Realign setting: %v, %v", opt.Realign, err)
	}
}

// exportBytes on a fitted run: each kind names its file and starts with
// its format's first bytes (gzip magic 1f 8b, RFC 1952; the TSV header the
// page promises); unknown kinds and indices are errors.
func TestExportBytes(t *testing.T) {
	if testing.Short() {
		t.Skip("fits the demo run")
	}
	files, err := analysis.DemoFiles(1)
	if err != nil {
		t.Fatal(err)
	}
	res, err := analysis.Fit(context.Background(), analysis.DemoInputs(files), analysis.FitOptions{Contrasts: []string{analysis.DemoContrast(1)}})
	if err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		what  string
		index int
		name  string
		head  string
	}{
		{"map", 0, res.Maps[0].File, "\x1f\x8b"},
		{"clusters", 0, "clusters.tsv", "contrast\tcluster\tvoxels\tvolume_mm3\t"},
		{"summary", 0, "summary.json", "{"},
		{"report", 0, "report.html", "<!"},
		{"design", 0, "design.tsv", res.Design.Names()[0]},
	} {
		name, _, b, err := exportBytes(res, c.what, c.index)
		if err != nil || name != c.name || !bytes.HasPrefix(b, []byte(c.head)) {
			t.Errorf("%s: name %q, %d bytes starting %.20q, err %v", c.what, name, len(b), b, err)
		}
	}
	for _, bad := range []struct {
		what  string
		index int
	}{{"map", -1}, {"map", len(res.Maps)}, {"motion", 0}, {"pictures", 0}} {
		if _, _, _, err := exportBytes(res, bad.what, bad.index); err == nil {
			t.Errorf("%s %d: no error", bad.what, bad.index)
		}
	}
}
