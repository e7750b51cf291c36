package analysis

import (
	"bufio"
	"bytes"
	"context"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
	"strconv"
	"strings"
	"sync"
	"testing"

	"winnow/core/design"
	"winnow/core/glm"
	"winnow/core/infer"
	"winnow/core/motion"
	"winnow/core/nifti"
)

var (
	demoOnce  sync.Once
	demoFiles map[string][]byte
	demoRes   *FitResult
	demoErr   error
)

// pageDemo fits the demo run once for the page helpers' tests.
func pageDemo(t *testing.T) (map[string][]byte, *FitResult) {
	t.Helper()
	if testing.Short() {
		t.Skip("needs a fit of the demo run")
	}
	demoOnce.Do(func() {
		demoFiles, demoErr = DemoFiles(1)
		if demoErr == nil {
			demoRes, demoErr = Fit(context.Background(), DemoInputs(demoFiles), FitOptions{Contrasts: []string{DemoContrast(1)}})
		}
	})
	if demoErr != nil {
		t.Fatal(demoErr)
	}
	return demoFiles, demoRes
}

func TestHistogram(t *testing.T) {
	_, res := pageDemo(t)
	h, err := res.Histogram(0, 60)
	if err != nil {
		t.Fatal(err)
	}
	// Identity: every finite in-mask z is counted once.
	var sum float64
	for _, c := range h.Counts {
		sum += c
	}
	if int(sum) != h.N || h.N != res.Summary.MaskVoxels {
		t.Errorf("counts sum to %v, N %d, mask voxels %d", sum, h.N, res.Summary.MaskVoxels)
	}
	w := h.Edges[1] - h.Edges[0]
	for i := 1; i < len(h.Edges); i++ {
		if math.Abs(h.Edges[i]-h.Edges[i-1]-w) > 1e-9 {
			t.Fatalf("bin %d has width %g, want %g", i, h.Edges[i]-h.Edges[i-1], w)
		}
	}
	lo, hi := h.Edges[0], h.Edges[len(h.Edges)-1]
	if lo > -4 || hi < 4 {
		t.Errorf("range [%g, %g] does not cover [-4, 4]", lo, hi)
	}
	// The curve is N·w·φ(z), φ the standard normal density (textbook
	// formula): at z = 0 it is N·w/sqrt(2π), and summed over the bin centres
	// it approaches N·(Φ(hi) − Φ(lo)) (midpoint rule; error below 1e-3 of N
	// for w ≤ 0.5).
	for i, z := range h.CurveZ {
		want := float64(h.N) * w * math.Exp(-z*z/2) / math.Sqrt(2*math.Pi)
		if math.Abs(h.CurveY[i]-want) > 1e-9*want+1e-12 {
			t.Fatalf("curve at z=%g: %g, want %g", z, h.CurveY[i], want)
		}
	}
	var mid float64
	for i := range h.Counts {
		z := (h.Edges[i] + h.Edges[i+1]) / 2
		mid += float64(h.N) * w * math.Exp(-z*z/2) / math.Sqrt(2*math.Pi)
	}
	phi := func(x float64) float64 { return 0.5 * math.Erfc(-x/math.Sqrt2) }
	if want := float64(h.N) * (phi(hi) - phi(lo)); math.Abs(mid-want) > 1e-3*float64(h.N) || w > 0.5 {
		t.Errorf("midpoint sum of the null curve %g, want %g (w = %g)", mid, want, w)
	}
	// The threshold is the summary's, inside the range, labelled by the
	// correction in force.
	zt := res.Summary.Contrasts[0].ZThreshold
	if zt == nil || h.Threshold == nil || *h.Threshold != *zt || *zt > hi || *zt < lo {
		t.Errorf("threshold %v, summary %v, range [%g, %g]", h.Threshold, zt, lo, hi)
	}
	if h.Label != "corrected" || !h.Corrected {
		t.Errorf("label %q corrected %v under fwe-rft", h.Label, h.Corrected)
	}
	if err := res.Rethreshold(infer.MethodNone, 0.001, DefaultClusterP); err != nil {
		t.Fatal(err)
	}
	defer res.Rethreshold(infer.MethodFWERFT, DefaultAlpha, DefaultClusterP)
	h2, _ := res.Histogram(0, 0)
	// Updating the earlier histogram gives what a fresh one gives (identity:
	// the counts do not depend on the threshold).
	h3, err := res.UpdateHistogram(h)
	if err != nil {
		t.Fatal(err)
	}
	h4, _ := res.Histogram(0, len(h.Counts))
	if fmt.Sprint(h3.Edges, h3.Counts, *h3.Threshold, h3.Label, h3.CurveY[:5]) != fmt.Sprint(h4.Edges, h4.Counts, *h4.Threshold, h4.Label, h4.CurveY[:5]) {
		t.Errorf("updated histogram differs from a fresh one:\n%v %v %v\n%v %v %v", h3.Edges[:3], *h3.Threshold, h3.Label, h4.Edges[:3], *h4.Threshold, h4.Label)
	}
	if *h.Threshold == *h3.Threshold || h.Label == h3.Label {
		t.Errorf("the update kept the old threshold %v %q", *h3.Threshold, h3.Label)
	}
	// z for an upper tail of 0.001 is 3.0902 (standard normal table).
	if h2.Label != "uncorrected" || h2.Threshold == nil || math.Abs(*h2.Threshold-3.0902) > 1e-3 {
		t.Errorf("after none at 0.001: label %q threshold %v", h2.Label, h2.Threshold)
	}
	if _, err := res.Histogram(5, 0); err == nil {
		t.Error("contrast 5 of 1 gave no error")
	}
}

func TestHRFCurve(t *testing.T) {
	tt, h := HRFCurve(0.1)
	if tt[0] != 0 || math.Abs(tt[len(tt)-1]-design.HRFLength) > 1e-9 || len(tt) != 321 {
		t.Fatalf("samples from %g to %g, %d of them; want 0 to 32 s every 0.1 s", tt[0], tt[len(tt)-1], len(tt))
	}
	// Identity: the trapezoid integral matches the closed form HRFArea.
	var area float64
	peak := 0
	for i := 1; i < len(h); i++ {
		area += 0.05 * (h[i] + h[i-1])
		if h[i] > h[peak] {
			peak = i
		}
	}
	if math.Abs(area-design.HRFArea()) > 1e-3 {
		t.Errorf("area %g, want %g", area, design.HRFArea())
	}
	// The double gamma with shapes 6 and 16 peaks near 5 s (the mode of
	// the gamma(6, 1) density is 5 s; common practice: the canonical peak
	// lies between 4.5 and 5.5 s).
	if tt[peak] < 4.5 || tt[peak] > 5.5 {
		t.Errorf("peak at %g s", tt[peak])
	}
}

func TestParseMotionTSV(t *testing.T) {
	p := []motion.Params{{}, {0.1, -0.2, 0.3, 0.5, 0, -0.25}, {0.1, -0.2, 0.4, 0.5, 0, -0.25}}
	fd := motion.FramewiseDisplacement(p)
	var b bytes.Buffer
	if err := motion.WriteTSV(&b, p, fd); err != nil {
		t.Fatal(err)
	}
	ms, err := ParseMotionTSV(b.Bytes())
	if err != nil {
		t.Fatal(err)
	}
	for i := range p {
		for a := range 6 {
			if math.Abs(ms.Params[i][a]-p[i][a]) > 5e-7 {
				t.Errorf("row %d param %d: %g, want %g", i, a, ms.Params[i][a], p[i][a])
			}
		}
		if math.Abs(ms.FD[i]-fd[i]) > 5e-7 {
			t.Errorf("row %d FD %g, want %g", i, ms.FD[i], fd[i])
		}
	}
	for _, bad := range []string{"", "a\tb\n", strings.Replace(b.String(), "0.100000", "x", 1)} {
		if _, err := ParseMotionTSV([]byte(bad)); err == nil {
			t.Errorf("%.30q parsed without error", bad)
		}
	}
}

// The demo's series at a planted peak: the observed values are the stored
// voxel values (no smoothing, no realignment), their mean is the mean map,
// and the refitted β gives the effect map's c'β (identity: the same model
// on the same data).
func TestSeriesAtDemo(t *testing.T) {
	files, res := pageDemo(t)
	c := res.Summary.Contrasts[0]
	if len(c.Clusters) == 0 {
		t.Fatal("no cluster in the demo")
	}
	ijk := c.Clusters[0].PeakIJK
	in := SeriesInputs{Bold: bytesInput("bold.nii.gz", files["bold.nii.gz"])}
	calls := 0
	s, err := res.SeriesAt(context.Background(), in, ijk, func(int, int) { calls++ })
	if err != nil {
		t.Fatal(err)
	}
	if calls == 0 {
		t.Error("progress never called")
	}
	idx := res.Grid.Index(ijk[0], ijk[1], ijk[2])
	nr, err := nifti.NewReader(bytes.NewReader(files["bold.nii.gz"]), nifti.Limits{})
	if err != nil {
		t.Fatal(err)
	}
	vol := make([]float32, res.Grid.Voxels())
	var mean float64
	for k := range s.Observed {
		if err := nr.ReadVolume(vol); err != nil {
			t.Fatal(err)
		}
		if s.Observed[k] != float64(vol[idx]) {
			t.Fatalf("volume %d: observed %g, stored %g", k, s.Observed[k], vol[idx])
		}
		mean += s.Observed[k]
	}
	mean /= float64(len(s.Observed))
	if m := float64(res.MapOf(-1, "mean").Data[idx]); math.Abs(mean-m) > 1e-5*math.Abs(m) {
		t.Errorf("series mean %g, mean map %g", mean, m)
	}
	checkEffect(t, res, s, idx, 1e-4)
	if tr := *res.Summary.TR; math.Abs(s.TimeSec[1]-s.TimeSec[0]-tr) > 1e-12 || math.Abs(s.TimeSec[0]-tr/2) > 1e-12 {
		t.Errorf("times %v for TR %g", s.TimeSec[:2], tr)
	}
	// Fitted values are X·β.
	var resid float64
	for k := range s.Fitted {
		resid += (s.Observed[k] - s.Fitted[k]) * (s.Observed[k] - s.Fitted[k])
	}
	if !(resid > 0) || math.IsNaN(resid) {
		t.Errorf("residual sum of squares %g", resid)
	}

	// Outside the mask and outside the grid: clear errors, no panic.
	out := -1
	for i, m := range res.Mask {
		if !m {
			out = i
			break
		}
	}
	nx, ny := res.Grid.Dims[0], res.Grid.Dims[1]
	_, err = res.SeriesAt(context.Background(), SeriesInputs{Bold: bytesInput("bold.nii.gz", files["bold.nii.gz"])}, [3]int{out % nx, out / nx % ny, out / (nx * ny)}, nil)
	if err == nil || !strings.Contains(err.Error(), "outside the analysis mask") {
		t.Errorf("voxel outside the mask: %v", err)
	}
	_, err = res.SeriesAt(context.Background(), in, [3]int{-1, 0, 0}, nil)
	if err == nil || !strings.Contains(err.Error(), "outside the grid") {
		t.Errorf("voxel outside the grid: %v", err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if _, err = res.SeriesAt(ctx, SeriesInputs{Bold: bytesInput("bold.nii.gz", files["bold.nii.gz"])}, ijk, nil); err == nil {
		t.Error("a canceled context gave no error")
	}
}

// checkEffect compares c'β of the refitted series with the effect map.
func checkEffect(t *testing.T, res *FitResult, s *Series, idx int, tol float64) {
	t.Helper()
	names := res.Design.Names()
	con := res.Summary.Contrasts[0]
	w := contrastWeights(t, con.Spec, names)
	var eff float64
	for j, b := range s.Beta {
		eff += w[j] * b
	}
	want := float64(res.MapOf(0, "effect").Data[idx])
	if math.Abs(eff-want) > tol*math.Max(math.Abs(want), 1) {
		t.Errorf("c'β of the refitted voxel %g, effect map %g", eff, want)
	}
}

func contrastWeights(t *testing.T, spec string, names []string) []float64 {
	t.Helper()
	// "NAME=a - b": +1 on a, -1 on b (the specs used here).
	expr := spec[strings.Index(spec, "=")+1:]
	parts := strings.Split(expr, "-")
	w := make([]float64, len(names))
	for i, p := range parts {
		p = strings.TrimSpace(p)
		for j, n := range names {
			if n == p {
				w[j] = 1
				if i > 0 {
					w[j] = -1
				}
			}
		}
	}
	return w
}

// smallBold writes a 12 x 12 x 8 run of 60 volumes (TR 2 s): a bright
// ellipsoid with noise and a block effect in one corner during "a", each
// volume shifted by a small sub-voxel translation when shift is set.
func smallBold(t *testing.T, shift bool) (bold, events []byte) {
	t.Helper()
	const nx, ny, nz, nv, tr = 12, 12, 8, 60, 2.0
	g := nifti.Grid{Dims: [3]int{nx, ny, nz}, VoxelMM: [3]float64{3, 3, 3},
		Affine:    [4][4]float64{{3, 0, 0, -16.5}, {0, 3, 0, -16.5}, {0, 0, 3, -10.5}, {0, 0, 0, 1}},
		SformCode: 2, QformCode: 2}
	var buf bytes.Buffer
	w, err := nifti.NewWriter(&buf, g, nv, tr, nifti.WriteOptions{})
	if err != nil {
		t.Fatal(err)
	}
	rng := rand.New(rand.NewPCG(3, 4))
	vol := make([]float32, nx*ny*nz)
	for v := range nv {
		on := math.Mod(float64(v)*tr, 40) < 16
		dx := 0.0
		if shift {
			dx = 0.3 * math.Sin(float64(v)/5)
		}
		for k := range nz {
			for j := range ny {
				for i := range nx {
					x, y, z := (float64(i)-5.5-dx)/5, (float64(j)-5.5)/5, (float64(k)-3.5)/3.5
					val := 0.0
					if r2 := x*x + y*y + z*z; r2 <= 1 {
						val = 800 + 300*(1-r2) + 8*rng.NormFloat64()
						if on && i >= 6 && i <= 8 && j >= 6 && j <= 8 && k >= 3 && k <= 5 {
							val += 60
						}
					}
					vol[i+nx*(j+ny*k)] = float32(val)
				}
			}
		}
		if err := w.WriteVolume(vol); err != nil {
			t.Fatal(err)
		}
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	ev := "onset\tduration\ttrial_type\n"
	for s := 0; s < nv*tr; s += 40 {
		ev += fmt.Sprintf("%d\t16\ta\n%d\t10\tb\n", s, s+20)
	}
	return buf.Bytes(), []byte(ev)
}

// With smoothing (OLS) and with realignment (AR(1)), the refitted voxel
// still reproduces the effect map: the series passes through the fit's steps.
func TestSeriesAtSmoothedRealigned(t *testing.T) {
	for _, tc := range []struct {
		name    string
		opt     FitOptions
		shift   bool
		tol     float64
		wantRho bool
	}{
		{"smooth-ols", FitOptions{SmoothMM: 6, Noise: glm.NoiseOLS}, false, 1e-4, false},
		{"realign-ar1", FitOptions{Realign: true}, true, 2e-3, true},
	} {
		t.Run(tc.name, func(t *testing.T) {
			bold, ev := smallBold(t, tc.shift)
			opt := tc.opt
			opt.Contrasts = []string{"a-b=a - b"}
			opt.Correct = infer.MethodNone
			res, err := Fit(context.Background(), FitInputs{Bold: bytesInput("bold.nii.gz", bold), Events: bytesInput("events.tsv", ev)}, opt)
			if err != nil {
				t.Fatal(err)
			}
			if tc.opt.Realign != (res.MotionTSV != nil) {
				t.Fatalf("motion table present %v", res.MotionTSV != nil)
			}
			ijk := [3]int{7, 7, 4}
			s, err := res.SeriesAt(context.Background(), SeriesInputs{Bold: bytesInput("bold.nii.gz", bold)}, ijk, nil)
			if err != nil {
				t.Fatal(err)
			}
			if (s.Rho != 0) != tc.wantRho {
				t.Errorf("rho %g", s.Rho)
			}
			checkEffect(t, res, s, res.Grid.Index(7, 7, 4), tc.tol)
		})
	}
}

func TestExports(t *testing.T) {
	_, res := pageDemo(t)
	for i, m := range res.Maps {
		b, err := res.MapBytes(i)
		if err != nil {
			t.Fatal(err)
		}
		if len(b) < 2 || b[0] != 0x1f || b[1] != 0x8b {
			t.Fatalf("%s: not gzip", m.File)
		}
		_, data, err := nifti.ReadImage(bytes.NewReader(b), nifti.Limits{})
		if err != nil {
			t.Fatalf("%s: %v", m.File, err)
		}
		for k := range data {
			if d := math.Abs(float64(data[k] - m.Data[k])); d > 0 && m.Write.Datatype == 0 {
				t.Fatalf("%s voxel %d: %g read back, %g written", m.File, k, data[k], m.Data[k])
			}
		}
	}
	if _, err := res.MapBytes(len(res.Maps)); err == nil {
		t.Error("map index past the end gave no error")
	}

	if err := res.Rethreshold(infer.MethodNone, 0.001, DefaultClusterP); err != nil {
		t.Fatal(err)
	}
	defer res.Rethreshold(infer.MethodFWERFT, DefaultAlpha, DefaultClusterP)
	var b bytes.Buffer
	if err := res.WriteClusterTSV(&b); err != nil {
		t.Fatal(err)
	}
	rows := readTSV(t, &b)
	if strings.Join(rows[0], ",") != "contrast,cluster,voxels,volume_mm3,peak_x_mm,peak_y_mm,peak_z_mm,peak_i,peak_j,peak_k,peak_stat,peak_z,p_corrected" {
		t.Fatalf("header %v", rows[0])
	}
	c := res.Summary.Contrasts[0]
	if len(rows)-1 != len(c.Clusters) || len(c.Clusters) == 0 {
		t.Fatalf("%d rows for %d clusters", len(rows)-1, len(c.Clusters))
	}
	for k, cl := range c.Clusters {
		r := rows[k+1]
		f := func(col int) float64 {
			v, err := strconv.ParseFloat(r[col], 64)
			if err != nil {
				t.Fatalf("row %d column %d: %v", k+1, col, err)
			}
			return v
		}
		if r[0] != c.Name || r[1] != strconv.Itoa(k+1) || int(f(2)) != cl.Voxels || int(f(7)) != cl.PeakIJK[0] ||
			math.Abs(f(11)-cl.PeakZ) > 1e-6*math.Abs(cl.PeakZ) || math.Abs(f(4)-cl.PeakMM[0]) > 1e-6 || r[12] != "n/a" {
			t.Errorf("row %d %v, cluster %+v", k+1, r, cl)
		}
	}
}

func readTSV(t *testing.T, r io.Reader) [][]string {
	t.Helper()
	var rows [][]string
	sc := bufio.NewScanner(r)
	for sc.Scan() {
		rows = append(rows, strings.Split(sc.Text(), "\t"))
	}
	return rows
}

// Re-thresholding is a function of the settings alone (identity): after the
// page's preparation (PrepareRethreshold) and a round of re-thresholds
// through every first-level method, which reuse the p order, the
// statistic's grid and the scratch grid of surviving voxels, each method
// gives the summary and thresholded map of a fresh fit made with it (the
// command line's --correct).
func TestRethresholdMatchesFreshFit(t *testing.T) {
	files, _ := pageDemo(t)
	fit := func(m infer.Method) *FitResult {
		r, err := Fit(context.Background(), DemoInputs(files), FitOptions{Contrasts: []string{DemoContrast(1)}, Correct: m})
		if err != nil {
			t.Fatal(err)
		}
		return r
	}
	page := fit(infer.MethodFWERFT)
	page.PrepareRethreshold()
	for _, m := range []infer.Method{infer.MethodNone, infer.MethodHolm, infer.MethodClusterRFT, infer.MethodBonferroni, infer.MethodFDRBY} {
		if err := page.Rethreshold(m, DefaultAlpha, DefaultClusterP); err != nil {
			t.Fatal(err)
		}
	}
	for _, m := range []infer.Method{infer.MethodFDRBH, infer.MethodClusterRFT, infer.MethodFWERFT} {
		if err := page.Rethreshold(m, DefaultAlpha, DefaultClusterP); err != nil {
			t.Fatal(err)
		}
		fresh := fit(m)
		var a, b bytes.Buffer
		if err := page.WriteSummary(&a); err != nil {
			t.Fatal(err)
		}
		if err := fresh.WriteSummary(&b); err != nil {
			t.Fatal(err)
		}
		if a.String() != b.String() {
			t.Errorf("%s: summary after re-thresholds differs from a fresh fit's", m)
		}
		if n := len(fresh.Summary.Contrasts[0].Clusters); n == 0 {
			t.Errorf("%s: no cluster in the fresh fit; the demo's planted activation should survive", m)
		}
		pt, ft := page.MapOf(0, "thresholded").Data, fresh.MapOf(0, "thresholded").Data
		for i := range ft {
			if math.Float32bits(pt[i]) != math.Float32bits(ft[i]) {
				t.Errorf("%s: thresholded map differs at voxel %d: %v, fresh %v", m, i, pt[i], ft[i])
				break
			}
		}
	}
}
