package analysis

import (
	"bufio"
	"bytes"
	"fmt"
	"math"
	"strconv"
	"strings"

	"winnow/core/design"
	"winnow/core/motion"
)

// This file holds the small computations behind the browser page's plots:
// the z histogram with its null density, the canonical HRF curve and the
// framewise displacement series. They live here so that the page draws
// numbers and does no statistics of its own.

// Histogram is the distribution of one contrast's in-mask z values with the
// density a null run would give.
type Histogram struct {
	Contrast int
	Edges    []float64 // bin edges, len(Counts)+1, ascending, equal width
	Counts   []float64 // in-mask voxels per bin
	N        int       // finite in-mask z values counted (every one falls in a bin)
	// CurveZ, CurveY sample the standard normal density scaled to the voxel
	// count and the bin width, N·w·φ(z): under the null hypothesis the
	// expected count of a bin of width w centred at z is close to it.
	CurveZ, CurveY []float64
	// Threshold is the z above which voxels survive (nil when no finite
	// threshold applies); Corrected says whether it controls a family-wise
	// or false discovery rate, and Label says so in words for the plot.
	Threshold *float64
	Corrected bool
	Label     string

	zMin, zMax float64 // range of the finite z values (before widening)
}

// Histogram returns the z histogram of contrast c with bins bins (0: 80).
// The range covers every finite in-mask z and at least [-4, 4], so the null
// curve is always visible; the threshold, when finite, is inside it.
func (r *FitResult) Histogram(c, bins int) (*Histogram, error) {
	if c < 0 || c >= len(r.contrasts) {
		return nil, fmt.Errorf("analysis: contrast %d; want 0 to %d", c, len(r.contrasts)-1)
	}
	if bins <= 0 {
		bins = 80
	}
	if bins > 10000 {
		return nil, fmt.Errorf("analysis: %d histogram bins; want at most 10000", bins)
	}
	cs := r.contrasts[c]
	zMin, zMax := math.Inf(1), math.Inf(-1)
	n := 0
	for _, z := range cs.z {
		if math.IsNaN(z) || math.IsInf(z, 0) {
			continue
		}
		n++
		zMin, zMax = math.Min(zMin, z), math.Max(zMax, z)
	}
	h := &Histogram{Contrast: c, N: n, zMin: zMin, zMax: zMax}
	lo, hi := r.histThreshold(h)
	w := (hi - lo) / float64(bins)
	h.Edges = make([]float64, bins+1)
	for i := range h.Edges {
		h.Edges[i] = lo + w*float64(i)
	}
	h.Edges[bins] = hi
	h.Counts = make([]float64, bins)
	for _, z := range cs.z {
		if math.IsNaN(z) || math.IsInf(z, 0) {
			continue
		}
		b := int((z - lo) / w)
		b = min(max(b, 0), bins-1)
		h.Counts[b]++
	}
	h.curve(lo, hi, w)
	return h, nil
}

// histThreshold sets h's threshold and label from the summary and returns
// the plotted range: every finite z, at least [-4, 4], the threshold with
// half a unit either side, rounded outwards to whole numbers so the bins
// fall on tidy edges.
func (r *FitResult) histThreshold(h *Histogram) (lo, hi float64) {
	out := r.Summary.Contrasts[h.Contrast]
	lo, hi = math.Min(-4, h.zMin), math.Max(4, h.zMax)
	h.Threshold, h.Corrected = nil, out.Corrected
	if t := out.ZThreshold; t != nil && !math.IsNaN(*t) && !math.IsInf(*t, 0) {
		v := *t
		h.Threshold = &v
		lo, hi = math.Min(lo, v-0.5), math.Max(hi, v+0.5)
	}
	switch {
	case out.ThresholdSource == "cluster-forming":
		h.Label = "cluster-forming, uncorrected"
	case out.Corrected:
		h.Label = "corrected"
	default:
		h.Label = "uncorrected"
	}
	return math.Floor(lo), math.Ceil(hi)
}

// UpdateHistogram returns the histogram of prev's contrast under the
// threshold now in force (after Rethreshold), reusing prev's counts when the
// plotted range is unchanged: the counts do not depend on the threshold.
// The result equals a fresh Histogram with as many bins.
func (r *FitResult) UpdateHistogram(prev *Histogram) (*Histogram, error) {
	if prev == nil || prev.Contrast < 0 || prev.Contrast >= len(r.contrasts) || len(prev.Counts) == 0 {
		return nil, fmt.Errorf("analysis: no histogram of this result to update")
	}
	h := *prev
	lo, hi := r.histThreshold(&h)
	if lo != prev.Edges[0] || hi != prev.Edges[len(prev.Edges)-1] {
		return r.Histogram(prev.Contrast, len(prev.Counts))
	}
	return &h, nil
}

// curve samples N·w·φ(z) over [lo, hi].
func (h *Histogram) curve(lo, hi, w float64) {
	const samples = 241
	n := h.N
	h.CurveZ = make([]float64, samples)
	h.CurveY = make([]float64, samples)
	scale := float64(n) * w / math.Sqrt(2*math.Pi)
	for i := range samples {
		z := lo + (hi-lo)*float64(i)/float64(samples-1)
		h.CurveZ[i] = z
		h.CurveY[i] = scale * math.Exp(-z*z/2)
	}
}

// HRFCurve samples the canonical double-gamma kernel design.HRF (per
// second, unnormalised) every step seconds over its support, 0 to 32 s.
func HRFCurve(step float64) (t, h []float64) {
	if !(step > 0) {
		step = 0.1
	}
	n := int(math.Floor(design.HRFLength/step+1e-9)) + 1
	t = make([]float64, n)
	h = make([]float64, n)
	for i := range n {
		t[i] = float64(i) * step
		h[i] = design.HRF(t[i])
	}
	return t, h
}

// MotionSeries is motion.tsv read back: the six rigid-body parameters and
// the framewise displacement of every volume.
type MotionSeries struct {
	Params []motion.Params
	FD     []float64 // mm; FD[0] = 0
}

// ParseMotionTSV reads the table FitResult.MotionTSV holds (header
// "trans_x ... rot_z framewise_displacement", tab-separated, one row per
// volume).
func ParseMotionTSV(b []byte) (*MotionSeries, error) {
	sc := bufio.NewScanner(bytes.NewReader(b))
	sc.Buffer(make([]byte, 0, 4096), 1<<20)
	want := append(append([]string{}, motion.Names[:]...), "framewise_displacement")
	if !sc.Scan() {
		return nil, fmt.Errorf("motion.tsv: empty; want a header line")
	}
	if got := strings.Split(strings.TrimRight(sc.Text(), "\r"), "\t"); strings.Join(got, "\t") != strings.Join(want, "\t") {
		return nil, fmt.Errorf("motion.tsv: header %q; want %q", strings.Join(got, " "), strings.Join(want, " "))
	}
	ms := &MotionSeries{}
	line := 1
	for sc.Scan() {
		line++
		f := strings.Split(strings.TrimRight(sc.Text(), "\r"), "\t")
		if len(f) != len(want) {
			return nil, fmt.Errorf("motion.tsv: line %d has %d fields; want %d", line, len(f), len(want))
		}
		var p motion.Params
		var fd float64
		for i, s := range f {
			v, err := strconv.ParseFloat(s, 64)
			if err != nil {
				return nil, fmt.Errorf("motion.tsv: line %d, column %q: %q is not a number", line, want[i], s)
			}
			if i < 6 {
				p[i] = v
			} else {
				fd = v
			}
		}
		ms.Params = append(ms.Params, p)
		ms.FD = append(ms.FD, fd)
	}
	if err := sc.Err(); err != nil {
		return nil, fmt.Errorf("motion.tsv: %w", err)
	}
	return ms, nil
}
