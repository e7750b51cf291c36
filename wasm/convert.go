package main

import (
	"bytes"
	"encoding/binary"
	"fmt"
	"math"
	"unsafe"

	"gonum.org/v1/gonum/mat"

	"winnow/core/analysis"
	"winnow/core/glm"
	"winnow/core/infer"
	"winnow/core/nullcheck"
	"winnow/core/report"
)

// Settings are the analysis settings of an analyze, demo or rethreshold
// request, as plain Go values decoded from the message. Zero means the
// documented default.
type Settings struct {
	Contrasts []string
	Correct   string  // infer.Method spelling; "": default
	Alpha     float64 // 0: default
	ClusterP  float64 // 0: default
	SmoothMM  float64 // FWHM, mm
	Highpass  *float64
	Noise     string // "ar1", "ols" or ""
	TR        float64
	HRFDerivs bool
	Modulate  []string
	Seed      uint64 // demo only
	Realign   bool
	NullCheck bool // the page's switch: NullCheckDesigns chance designs
}

// NullCheckDesigns is the number of chance designs the page's null-check
// switch asks for.
const NullCheckDesigns = 40

// method decodes the correction name.
func (s Settings) method() (infer.Method, error) {
	if s.Correct == "" {
		return infer.MethodDefault, nil
	}
	return infer.ParseMethod(s.Correct)
}

// FitOptions converts the settings. Range checks on the numbers are left to
// package analysis, so the page and the command line report the same text.
func (s Settings) FitOptions() (analysis.FitOptions, error) {
	m, err := s.method()
	if err != nil {
		return analysis.FitOptions{}, &analysis.InputError{File: "correct", Err: err}
	}
	var noise glm.Noise
	switch s.Noise {
	case "", "ar1":
		noise = glm.NoiseDefault
		if s.Noise == "ar1" {
			noise = glm.NoiseAR1
		}
	case "ols":
		noise = glm.NoiseOLS
	default:
		return analysis.FitOptions{}, &analysis.InputError{File: "noise", Err: fmt.Errorf("%q, want ar1 or ols", s.Noise)}
	}
	return analysis.FitOptions{
		Contrasts:   s.Contrasts,
		TR:          s.TR,
		SmoothMM:    s.SmoothMM,
		HighpassSec: s.Highpass,
		Noise:       noise,
		Correct:     m,
		Alpha:       s.Alpha,
		ClusterP:    s.ClusterP,
		HRFDerivs:   s.HRFDerivs,
		Modulate:    s.Modulate,
		Realign:     s.Realign,
		NullCheck:   nullCheckDesigns(s.NullCheck),
	}, nil
}

func nullCheckDesigns(on bool) int {
	if on {
		return NullCheckDesigns
	}
	return 0
}

// NullCheckText is what the page shows of a summary's null check: the
// sentence for people and, when the interval's lower bound is above alpha,
// the warning; both "" when the summary holds no null check.
func NullCheckText(nc *report.NullCheck, alpha float64) (sentence, warning string) {
	if nc == nil {
		return "", ""
	}
	return nullcheck.Sentence(*nc), nullcheck.Warning(*nc, alpha)
}

// GroupSettings are the settings of a group request, decoded from the
// message. Zero means the documented default.
type GroupSettings struct {
	Contrasts []string
	Correct   string // "": fwe-perm
	Perms     int
	Seed      *uint64
	Alpha     float64
	ClusterP  float64
	Shard     int // 1-based; with Shards > 0
	Shards    int
}

// GroupOptions converts the settings; one worker per shard (the page runs
// shards in separate Web Workers).
func (s GroupSettings) GroupOptions() (analysis.GroupOptions, error) {
	var m infer.Method
	if s.Correct != "" {
		var err error
		if m, err = infer.ParseMethod(s.Correct); err != nil {
			return analysis.GroupOptions{}, &analysis.InputError{File: "correct", Err: err}
		}
	}
	if s.Perms < 0 {
		return analysis.GroupOptions{}, &analysis.InputError{File: "perms", Err: fmt.Errorf("%d, want a positive number of relabellings", s.Perms)}
	}
	if s.Shards < 0 || s.Shards > 0 && (s.Shard < 1 || s.Shard > s.Shards) {
		return analysis.GroupOptions{}, &analysis.InputError{File: "shard", Err: fmt.Errorf("%d of %d, want K of N with 1 <= K <= N", s.Shard, s.Shards)}
	}
	return analysis.GroupOptions{
		Contrasts: s.Contrasts, Correct: m, Perms: s.Perms, Seed: s.Seed,
		Alpha: s.Alpha, ClusterP: s.ClusterP, Workers: 1, Shard: s.Shard, Shards: s.Shards,
	}, nil
}

// Rethreshold returns the method, alpha and cluster-forming p of a
// rethreshold request, with the defaults of a fit filled in.
func (s Settings) Rethreshold() (m infer.Method, alpha, clusterP float64, err error) {
	if m, err = s.method(); err != nil {
		return 0, 0, 0, &analysis.InputError{File: "correct", Err: err}
	}
	if m == infer.MethodDefault {
		m = infer.MethodFWERFT
	}
	alpha, clusterP = s.Alpha, s.ClusterP
	if alpha == 0 {
		alpha = analysis.DefaultAlpha
	}
	if clusterP == 0 {
		clusterP = analysis.DefaultClusterP
	}
	return m, alpha, clusterP, nil
}

// sentKinds are the maps the page's views draw; the others stay in the worker.
var sentKinds = map[string]bool{"mean": true, "z": true, "stat": true, "thresholded": true}

// viewMaps picks the maps a result carries: all view kinds, or only the
// thresholded ones after a rethreshold.
func viewMaps(maps []analysis.Map, partial bool) []analysis.Map {
	var out []analysis.Map
	for _, m := range maps {
		if partial && m.Kind != "thresholded" || !sentKinds[m.Kind] {
			continue
		}
		out = append(out, m)
	}
	return out
}

// float32Bytes is src as little-endian IEEE 754 bytes, the memory layout of
// a JS Float32Array on every platform that runs WebAssembly. On a
// little-endian machine it is src's own memory, not a copy: the callers only
// read it (copying it into a JS array at once).
func float32Bytes(src []float32) []byte {
	if littleEndian && len(src) > 0 {
		return unsafe.Slice((*byte)(unsafe.Pointer(&src[0])), 4*len(src))
	}
	b := make([]byte, 4*len(src))
	for i, v := range src {
		binary.LittleEndian.PutUint32(b[4*i:], math.Float32bits(v))
	}
	return b
}

// float64Bytes is src as little-endian IEEE 754 bytes (a Float64Array); on
// a little-endian machine, src's own memory.
func float64Bytes(src []float64) []byte {
	if littleEndian && len(src) > 0 {
		return unsafe.Slice((*byte)(unsafe.Pointer(&src[0])), 8*len(src))
	}
	b := make([]byte, 8*len(src))
	for i, v := range src {
		binary.LittleEndian.PutUint64(b[8*i:], math.Float64bits(v))
	}
	return b
}

// littleEndian is true where the machine's byte order is little-endian
// (WebAssembly's always is).
var littleEndian = binary.NativeEndian.Uint16([]byte{1, 0}) == 1

// boolBytes is 1 for true and 0 for false (a Uint8Array).
func boolBytes(src []bool) []byte {
	b := make([]byte, len(src))
	for i, v := range src {
		if v {
			b[i] = 1
		}
	}
	return b
}

// denseRows is the matrix in row-major order.
func denseRows(x *mat.Dense) (rows, cols int, data []float64) {
	rows, cols = x.Dims()
	data = make([]float64, 0, rows*cols)
	for r := 0; r < rows; r++ {
		data = append(data, x.RawRowView(r)...)
	}
	return rows, cols, data
}

// affineRows flattens a 4x4 affine row by row.
func affineRows(a [4][4]float64) []float64 {
	out := make([]float64, 0, 16)
	for _, row := range a {
		out = append(out, row[:]...)
	}
	return out
}

// exportBytes encodes one downloadable file of a result: "map" (index into
// r.Maps, as .nii.gz), "clusters" (clusters.tsv), "summary" (summary.json),
// "report" (report.html), "design" (design.tsv) or "motion" (motion.tsv).
func exportBytes(r *analysis.FitResult, what string, index int) (name, mime string, b []byte, err error) {
	var buf bytes.Buffer
	switch what {
	case "map":
		if index < 0 || index >= len(r.Maps) {
			return "", "", nil, fmt.Errorf("export: map %d; want 0 to %d", index, len(r.Maps)-1)
		}
		b, err = r.MapBytes(index)
		return r.Maps[index].File, "application/gzip", b, err
	case "clusters":
		err = r.WriteClusterTSV(&buf)
		name, mime = "clusters.tsv", "text/tab-separated-values"
	case "summary":
		err = r.WriteSummary(&buf)
		name, mime = "summary.json", "application/json"
	case "report":
		err = r.WriteReport(&buf)
		name, mime = "report.html", "text/html"
	case "design":
		err = r.Design.WriteTSV(&buf)
		name, mime = "design.tsv", "text/tab-separated-values"
	case "motion":
		if r.MotionTSV == nil {
			return "", "", nil, fmt.Errorf("export: the run was not realigned; there is no motion.tsv")
		}
		buf.Write(r.MotionTSV)
		name, mime = "motion.tsv", "text/tab-separated-values"
	default:
		return "", "", nil, fmt.Errorf("export: %q; want map, clusters, summary, report, design or motion", what)
	}
	if err != nil {
		return "", "", nil, err
	}
	return name, mime, buf.Bytes(), nil
}
