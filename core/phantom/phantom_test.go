package phantom

import (
	"bytes"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"
	"sync"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// run is one full pass over the seed-1 scenario, shared by the tests.
type run struct {
	s        *Scenario
	hash     uint64
	volumes  int
	mean     []float64   // time-mean image
	series   [][]float64 // per probe voxel, one value per volume
	probes   map[int32]int
	maxDev   float64 // largest |x − round(x)| seen
	minV     float32
	maxV     float32
	eofTwice bool
}

var (
	run1     *run
	run1Once sync.Once
)

// streamRun reads a scenario to io.EOF, hashing every volume's values and
// keeping the time series of the probe voxels.
func streamRun(s *Scenario, probes []int32) *run {
	n := s.Dims[0] * s.Dims[1] * s.Dims[2]
	r := &run{s: s, mean: make([]float64, n), probes: map[int32]int{},
		minV: math.MaxFloat32, maxV: -math.MaxFloat32}
	for i, v := range probes {
		r.probes[v] = i
	}
	r.series = make([][]float64, len(probes))
	// FNV-1a over the values' 32-bit patterns: cheap enough for WebAssembly
	// and ample to tell two runs apart.
	h := uint64(14695981039346656037)
	vol := make([]float32, n)
	st := s.Stream()
	for {
		err := st.Next(vol)
		if err == io.EOF {
			break
		}
		if err != nil {
			panic(err)
		}
		r.volumes++
		for v, x := range vol {
			h = (h ^ uint64(math.Float32bits(x))) * 1099511628211
			r.mean[v] += float64(x)
			r.maxDev = max(r.maxDev, math.Abs(float64(x)-math.Round(float64(x))))
			r.minV, r.maxV = min(r.minV, x), max(r.maxV, x)
		}
		for i, v := range probes {
			r.series[i] = append(r.series[i], float64(vol[v]))
		}
	}
	r.eofTwice = st.Next(vol) == io.EOF
	r.hash = h
	for v := range r.mean {
		r.mean[v] /= float64(max(r.volumes, 1))
	}
	return r
}

// noiseProbes picks spread-out brain voxels far from every planted region,
// each with its +x neighbour (also such a voxel), as pairs (v, v+1).
func noiseProbes(s *Scenario) []int32 {
	far := func(v int) bool {
		l := s.label[v]
		if l != labGM && l != labWM && l != labDeepGM {
			return false
		}
		i, j, k := v%nx, (v/nx)%ny, v/(nx*ny)
		for _, b := range s.Blobs {
			d := math.Sqrt(sq(float64(i-b.IJK[0])*voxX) + sq(float64(j-b.IJK[1])*voxY) + sq(float64(k-b.IJK[2])*voxZ))
			if d < b.RadiusMM+15 {
				return false
			}
		}
		return true
	}
	var out []int32
	for k := 2; k < nz; k += 3 {
		for j := 1; j < ny; j += 4 {
			for i := 1; i < nx-1; i += 4 {
				v := i + nx*(j+ny*k)
				if far(v) && far(v+1) {
					out = append(out, int32(v), int32(v+1))
				}
			}
		}
	}
	return out
}

func getRun1(t *testing.T) *run {
	t.Helper()
	run1Once.Do(func() {
		s := New(1)
		probes := noiseProbes(s)
		for _, b := range s.Blobs {
			probes = append(probes, b.idx...)
		}
		run1 = streamRun(s, probes)
	})
	return run1
}

func TestDeterminism(t *testing.T) {
	r := getRun1(t)
	// Same seed: the same bytes, volumes and tables included.
	again := New(1)
	if !bytes.Equal(again.EventsTSV, r.s.EventsTSV) || !bytes.Equal(again.ConfoundsTSV, r.s.ConfoundsTSV) ||
		!bytes.Equal(again.ReadmeTXT, r.s.ReadmeTXT) {
		t.Fatal("seed 1 twice: the tables differ")
	}
	for v := range again.Truth {
		if again.Truth[v] != r.s.Truth[v] {
			t.Fatalf("seed 1 twice: truth differs at voxel %d", v)
		}
	}
	if r2 := streamRun(again, nil); r2.hash != r.hash {
		t.Fatal("seed 1 twice: the volumes differ")
	}
	// A different seed: different noise, motion traces and volumes.
	other := New(2)
	if bytes.Equal(other.ConfoundsTSV, r.s.ConfoundsTSV) {
		t.Error("seeds 1 and 2 give the same confounds")
	}
	n := nx * ny * nz
	a, b := make([]float32, n), make([]float32, n)
	if err := New(1).Stream().Next(a); err != nil {
		t.Fatal(err)
	}
	if err := other.Stream().Next(b); err != nil {
		t.Fatal(err)
	}
	diff := 0
	for v := range a {
		if a[v] != b[v] {
			diff++
		}
	}
	// Nearly every voxel carries independent noise of SD ≥ several units.
	if diff < n/2 {
		t.Errorf("seeds 1 and 2: first volumes differ in %d of %d voxels", diff, n)
	}
}

func TestStreamContract(t *testing.T) {
	r := getRun1(t)
	if r.volumes != r.s.Volumes || r.volumes < 150 {
		t.Fatalf("stream gave %d volumes, scenario says %d (want at least 150)", r.volumes, r.s.Volumes)
	}
	if !r.eofTwice {
		t.Error("Next after the end did not return io.EOF again")
	}
	// int16 export: whole numbers within [-32768, 32767].
	if r.maxDev != 0 || r.minV < math.MinInt16 || r.maxV > math.MaxInt16 {
		t.Errorf("values not whole int16: max |x - round(x)| = %g, range [%g, %g]", r.maxDev, r.minV, r.maxV)
	}
	if r.minV < 0 {
		t.Errorf("negative value %g; magnitude images are non-negative", r.minV)
	}
	defer func() {
		msg := fmt.Sprint(recover())
		if !strings.HasPrefix(msg, "phantom: ") {
			t.Errorf("short slice: recovered %q, want a panic with the package prefix", msg)
		}
	}()
	_ = r.s.Stream().Next(make([]float32, 10))
}

func TestGridAndAffine(t *testing.T) {
	s := New(1)
	if s.Dims != [3]int{64, 64, 36} || s.TR != 2 || s.Volumes != 160 {
		t.Fatalf("dims %v, TR %g, volumes %d", s.Dims, s.TR, s.Volumes)
	}
	// RAS, oblique-free: a positive diagonal equal to the voxel size.
	for r := 0; r < 3; r++ {
		for c := 0; c < 3; c++ {
			want := 0.0
			if r == c {
				want = s.VoxelMM[r]
			}
			if s.Affine[r][c] != want {
				t.Errorf("affine[%d][%d] = %g, want %g", r, c, s.Affine[r][c], want)
			}
		}
	}
	if s.Affine[3] != [4]float64{0, 0, 0, 1} {
		t.Errorf("affine last row %v", s.Affine[3])
	}
	// The grid's centre maps to within one voxel of the world origin.
	c := s.world(float64(nx-1)/2, float64(ny-1)/2, float64(nz-1)/2)
	for a := range c {
		if math.Abs(c[a]) > s.VoxelMM[a] {
			t.Errorf("grid centre at %v mm, want near the origin", c)
		}
	}
	if s.QformCode <= 0 || s.SformCode <= 0 {
		t.Errorf("qform_code %d, sform_code %d; want > 0", s.QformCode, s.SformCode)
	}
	for _, b := range s.Blobs {
		if w := s.world(float64(b.IJK[0]), float64(b.IJK[1]), float64(b.IJK[2])); w != b.MM {
			t.Errorf("%s: MM %v, affine gives %v", b.Name, b.MM, w)
		}
	}
}

func TestIntensities(t *testing.T) {
	r := getRun1(t)
	s := r.s
	var brain, gm, wm, csf, bg float64
	var nb, ng, nw, nc, nbg int
	for v, m := range r.mean {
		if s.Brain[v] {
			brain += m
			nb++
		}
		switch s.label[v] {
		case labGM:
			gm, ng = gm+m, ng+1
		case labWM:
			wm, nw = wm+m, nw+1
		case labCSF:
			if s.Brain[v] {
				csf, nc = csf+m, nc+1
			}
		case labBackground:
			if s.base[v] < 0.5 { // far from the head's blurred edge
				bg, nbg = bg+m, nbg+1
			}
		}
	}
	brain, gm, wm, csf, bg = brain/float64(nb), gm/float64(ng), wm/float64(nw), csf/float64(nc), bg/float64(nbg)
	// Typical BOLD int16 exports put brain at roughly 600–1200 units (the
	// scenario's brief; common practice).
	if brain < 600 || brain > 1200 {
		t.Errorf("mean brain intensity %.1f, want 600 to 1200", brain)
	}
	// The intended contrast: grey brighter than white, CSF darker than both.
	if !(gm > wm && wm > csf) {
		t.Errorf("mean grey %.1f, white %.1f, CSF %.1f; want grey > white > CSF", gm, wm, csf)
	}
	// Background of pure noise: the Rayleigh mean sigma·sqrt(pi/2) (a
	// textbook property of the magnitude of complex Gaussian noise),
	// within 5 % (rounding to integers shifts it by far less).
	want := bgSigma * math.Sqrt(math.Pi/2)
	if math.Abs(bg-want) > 0.05*want {
		t.Errorf("background mean %.3f, want %.3f (Rayleigh, sigma %g)", bg, want, float64(bgSigma))
	}
	t.Logf("mean brain %.1f, grey %.1f, white %.1f, CSF %.1f, background %.2f", brain, gm, wm, csf, bg)
}

func TestHeadShape(t *testing.T) {
	r := getRun1(t)
	// The head as seen in the data: mean intensity well above the noise.
	head := func(i, j, k int) bool { return r.mean[i+nx*(j+ny*k)] > 200 }
	for _, c := range [][3]int{{0, 0, 0}, {nx - 1, 0, 0}, {0, ny - 1, 0}, {nx - 1, ny - 1, 0},
		{0, 0, nz - 1}, {nx - 1, 0, nz - 1}, {0, ny - 1, nz - 1}, {nx - 1, ny - 1, nz - 1}} {
		if head(c[0], c[1], c[2]) {
			t.Errorf("grid corner %v is inside the head", c)
		}
	}
	if !head(nx/2, ny/2, nz/2) {
		t.Error("the grid centre is not inside the head")
	}
	lo, hi := [3]int{nx, ny, nz}, [3]int{-1, -1, -1}
	count := 0
	for k := 0; k < nz; k++ {
		for j := 0; j < ny; j++ {
			for i := 0; i < nx; i++ {
				if head(i, j, k) {
					count++
					p := [3]int{i, j, k}
					for a := range p {
						lo[a], hi[a] = min(lo[a], p[a]), max(hi[a], p[a])
					}
				}
			}
		}
	}
	box := (hi[0] - lo[0] + 1) * (hi[1] - lo[1] + 1) * (hi[2] - lo[2] + 1)
	// An ellipsoid fills pi/6 ≈ 0.52 of its bounding box (geometry); a box
	// would fill 1. Cutting the bottom off raises the fraction somewhat.
	frac := float64(count) / float64(box)
	if frac < 0.4 || frac > 0.7 {
		t.Errorf("head fills %.3f of its bounding box %v..%v; want an ellipsoid-like 0.4 to 0.7", frac, lo, hi)
	}
	t.Logf("head voxels %d, bounding box %v..%v, fill %.3f", count, lo, hi, frac)
}

// parseTSV splits a tab-separated table with a header row.
func parseTSV(t *testing.T, b []byte) (header []string, rows [][]string) {
	t.Helper()
	lines := strings.Split(strings.TrimSuffix(string(b), "\n"), "\n")
	header = strings.Split(lines[0], "\t")
	for i, l := range lines[1:] {
		f := strings.Split(l, "\t")
		if len(f) != len(header) {
			t.Fatalf("line %d: %d fields, header has %d", i+2, len(f), len(header))
		}
		rows = append(rows, f)
	}
	return header, rows
}

func parseNum(t *testing.T, s string) float64 {
	t.Helper()
	x, err := strconv.ParseFloat(s, 64)
	if err != nil {
		t.Fatal(err)
	}
	return x
}

func TestEvents(t *testing.T) {
	for _, seed := range []uint64{1, 2, 3} {
		s := New(seed)
		header, rows := parseTSV(t, s.EventsTSV)
		// BIDS events: onset, duration, trial_type (the BIDS specification).
		if strings.Join(header, ",") != "onset,duration,trial_type" {
			t.Fatalf("seed %d: header %q", seed, header)
		}
		runSec := float64(s.Volumes) * s.TR
		perCond := map[string]int{}
		taskSec, prevEnd := 0.0, 0.0
		var first, lastEnd float64
		for i, r := range rows {
			on, du := parseNum(t, r[0]), parseNum(t, r[1])
			if du <= 0 || on < prevEnd || on+du > runSec {
				t.Fatalf("seed %d, row %d: onset %g, duration %g after an event ending at %g, run %g s", seed, i+1, on, du, prevEnd, runSec)
			}
			if i == 0 {
				first = on
			}
			prevEnd, lastEnd = on+du, on+du
			perCond[r[2]]++
			taskSec += du
		}
		for _, c := range s.Conditions {
			if perCond[c] < 4 {
				t.Errorf("seed %d: %d blocks of %q, want at least 4", seed, perCond[c], c)
			}
		}
		if len(perCond) != len(s.Conditions) || len(s.Conditions) < 2 {
			t.Errorf("seed %d: conditions in the file %v, scenario %v", seed, perCond, s.Conditions)
		}
		// The blocks span the run, with rest left at the end for the
		// response to return to baseline (~25 s for this HRF, §a.1).
		if first > 20 || lastEnd < runSec-60 || runSec-lastEnd < 16 {
			t.Errorf("seed %d: blocks from %g s to %g s in a %g s run", seed, first, lastEnd, runSec)
		}
		if f := taskSec / runSec; f < 0.4 || f > 0.7 {
			t.Errorf("seed %d: task fraction %.2f", seed, f)
		}
		if !strings.Contains(s.Contrast, "=") || !strings.Contains(s.Contrast, "count - watch") {
			t.Errorf("contrast %q", s.Contrast)
		}
	}
}

// confoundColumns parses ConfoundsTSV into columns.
func confoundColumns(t *testing.T, s *Scenario) ([]string, [][]float64) {
	t.Helper()
	header, rows := parseTSV(t, s.ConfoundsTSV)
	cols := make([][]float64, len(header))
	for _, r := range rows {
		for c := range header {
			cols[c] = append(cols[c], parseNum(t, r[c]))
		}
	}
	return header, cols
}

func TestConfounds(t *testing.T) {
	s := New(1)
	header, cols := confoundColumns(t, s)
	if strings.Join(header, ",") != "trans_x,trans_y,trans_z,rot_x,rot_y,rot_z" {
		t.Fatalf("header %q", header)
	}
	for c, name := range header {
		x := cols[c]
		if len(x) != s.Volumes {
			t.Fatalf("%s: %d rows, want one per volume (%d)", name, len(x), s.Volumes)
		}
		peak, num, den := 0.0, 0.0, 0.0
		m := 0.0
		for _, v := range x {
			m += v / float64(len(x))
		}
		for k, v := range x {
			peak = max(peak, math.Abs(v))
			den += (v - m) * (v - m)
			if k > 0 {
				num += (v - m) * (x[k-1] - m)
			}
		}
		limit := 0.3 // mm, the brief's bound for translations
		if c >= 3 {
			limit = 0.2 // degrees: 0.2° at 80 mm from the centre moves 0.28 mm
		}
		if peak > limit || peak == 0 {
			t.Errorf("%s: peak %g, want in (0, %g]", name, peak, limit)
		}
		// A smoothed random walk is strongly autocorrelated.
		if num/den < 0.8 {
			t.Errorf("%s: lag-1 autocorrelation %.3f, want > 0.8", name, num/den)
		}
	}
}

func TestTruthAndBlobs(t *testing.T) {
	s := New(1)
	inTruth := 0
	for _, b := range s.Blobs {
		if len(b.Percent) != len(s.Conditions) {
			t.Fatalf("%s: %d percents for %d conditions", b.Name, len(b.Percent), len(s.Conditions))
		}
		if b.Voxels != len(b.idx) || b.Voxels < 20 {
			t.Errorf("%s: %d voxels", b.Name, b.Voxels)
		}
		diff := b.Percent[0] - b.Percent[1]
		if b.InTruth {
			inTruth += b.Voxels
			// 1–3 % count over watch (the scenario's brief).
			if diff < 1 || diff > 3 {
				t.Errorf("%s: count − watch %g %%", b.Name, diff)
			}
		} else if diff != 0 || b.Percent[1] <= 0 {
			t.Errorf("%s: shared region with count %g %%, watch %g %%", b.Name, b.Percent[0], b.Percent[1])
		}
		for _, v := range b.idx {
			if !s.Brain[v] {
				t.Errorf("%s: voxel %d outside the brain", b.Name, v)
			}
			if (s.Truth[v] == 1) != b.InTruth {
				t.Errorf("%s: truth %g at voxel %d", b.Name, s.Truth[v], v)
			}
		}
	}
	ones := 0
	for _, x := range s.Truth {
		switch x {
		case 1:
			ones++
		case 0:
		default:
			t.Fatalf("truth value %g", x)
		}
	}
	if ones != inTruth || ones == 0 {
		t.Errorf("truth has %d ones, the truth blobs %d voxels", ones, inTruth)
	}
	// The README states what was planted where.
	readme := string(s.ReadmeTXT)
	for _, want := range []string{"64 x 64 x 36", "3 x 3 x 3.5 mm", "TR 2 s", "160 volumes", s.Contrast,
		"rho = 0.35", "FWHM 2 voxels", "trans_z"} {
		if !strings.Contains(readme, want) {
			t.Errorf("README lacks %q", want)
		}
	}
	for _, b := range s.Blobs {
		ijk := fmt.Sprintf("(%d, %d, %d)", b.IJK[0], b.IJK[1], b.IJK[2])
		mm := fmt.Sprintf("(%g, %g, %g)", b.MM[0], b.MM[1], b.MM[2])
		if !strings.Contains(readme, b.Name) || !strings.Contains(readme, ijk) || !strings.Contains(readme, mm) {
			t.Errorf("README lacks %s at %s / %s", b.Name, ijk, mm)
		}
	}
}

// dctBasis is the discrete cosine drift set cos(pi k (t + 0.5)/n),
// k = 1..K with K = floor(2 n TR / cutoff) (methods notes §b.1).
func dctBasis(n int, tr, cutoff float64) [][]float64 {
	K := int(math.Floor(2 * float64(n) * tr / cutoff))
	out := make([][]float64, K)
	for k := range out {
		out[k] = make([]float64, n)
		for t := range out[k] {
			out[k][t] = math.Cos(math.Pi * float64(k+1) * (float64(t) + 0.5) / float64(n))
		}
	}
	return out
}

// nuisanceDesign is [extra..., intercept, DCT (128 s), six confounds].
func nuisanceDesign(t *testing.T, s *Scenario, extra ...[]float64) *mat.Dense {
	t.Helper()
	n := s.Volumes
	ones := make([]float64, n)
	for i := range ones {
		ones[i] = 1
	}
	cols := append(append([][]float64{}, extra...), ones)
	cols = append(cols, dctBasis(n, s.TR, 128)...)
	_, conf := confoundColumns(t, s)
	cols = append(cols, conf...)
	x := mat.NewDense(n, len(cols), nil)
	for c, col := range cols {
		x.SetCol(c, col)
	}
	return x
}

// residualMaker is R = I − X (X'X)⁻¹ X'.
func residualMaker(t *testing.T, x *mat.Dense) *mat.Dense {
	t.Helper()
	n, _ := x.Dims()
	var xtx, inv, h mat.Dense
	xtx.Mul(x.T(), x)
	if err := inv.Inverse(&xtx); err != nil {
		t.Fatal(err)
	}
	h.Product(x, &inv, x.T())
	r := mat.NewDense(n, n, nil)
	for i := 0; i < n; i++ {
		for j := 0; j < n; j++ {
			d := 0.0
			if i == j {
				d = 1
			}
			r.Set(i, j, d-h.At(i, j))
		}
	}
	return r
}

// Temporal and spatial noise properties in brain voxels far from every
// planted region, after regressing out the mean, a 128 s cosine drift set
// and the confounds.
func TestNoise(t *testing.T) {
	r := getRun1(t)
	s := r.s
	probes := noiseProbes(s)
	if len(probes) < 200 {
		t.Fatalf("only %d noise probes", len(probes))
	}
	x := nuisanceDesign(t, s)
	n, pcols := x.Dims()
	R := residualMaker(t, x)
	var a0, a1, relSD, spatial float64
	res := make([][]float64, len(probes))
	for p, v := range probes {
		y := mat.NewVecDense(n, r.series[r.probes[v]])
		var e mat.VecDense
		e.MulVec(R, y)
		res[p] = e.RawVector().Data
		ss, s1 := 0.0, 0.0
		for k := 0; k < n; k++ {
			ss += res[p][k] * res[p][k]
			if k > 0 {
				s1 += res[p][k] * res[p][k-1]
			}
		}
		// Pool the moments scaled by each voxel's own variance, so that
		// bright and dark voxels count alike.
		a0 += 1
		a1 += s1 / ss
		relSD += math.Sqrt(ss/float64(n-pcols)) / float64(s.base[v])
	}
	np := float64(len(probes))
	a1 /= np
	relSD /= np
	// Bias-corrected AR(1) coefficient: solve [a0; a1] = M [v0; v1] with
	// M = [[tr R, tr R(S+S')], [tr RS, tr RSR(S+S')]], S the lag-1 shift
	// (methods notes §d.3, after Worsley et al. 2002). Here a0 is 1 per
	// voxel and a1 the lag-1 sum over the sum of squares.
	S := mat.NewDense(n, n, nil)
	for k := 1; k < n; k++ {
		S.Set(k, k-1, 1)
	}
	var sst, rs, rsst, rsr, m11 mat.Dense
	sst.Add(S, S.T())
	rs.Mul(R, S)
	rsst.Mul(R, &sst)
	rsr.Mul(&rs, R)
	m11.Mul(&rsr, &sst)
	m := mat.NewDense(2, 2, []float64{mat.Trace(R), mat.Trace(&rsst), mat.Trace(&rs), mat.Trace(&m11)})
	var sol mat.VecDense
	if err := sol.SolveVec(m, mat.NewVecDense(2, []float64{a0 / np, a1})); err != nil {
		t.Fatal(err)
	}
	rho := sol.AtVec(1) / sol.AtVec(0)
	// The brief: ρ about 0.35 ± 0.1.
	if math.Abs(rho-noiseRho) > 0.1 {
		t.Errorf("lag-1 autocorrelation %.3f (raw %.3f), want %.2f ± 0.1", rho, a1, noiseRho)
	}
	// Noise SD 1.2 % of baseline (the README); 15 % slack for sampling
	// and the spatially modulated drift the cosine set leaves behind.
	if math.Abs(relSD-noiseFrac) > 0.15*noiseFrac {
		t.Errorf("noise SD %.4f of baseline, want %.4f", relSD, noiseFrac)
	}
	// Neighbouring voxels: smoothing white noise with a Gaussian of FWHM F
	// voxels gives a correlation 2^(−2/F²) at one voxel (the convolution
	// of two Gaussians; derived). F = 2 gives 0.707. 0.05 allows for the
	// sampled, truncated kernel.
	for p := 0; p < len(probes); p += 2 {
		a, b := res[p], res[p+1]
		var ab, aa, bb float64
		for k := range a {
			ab += a[k] * b[k]
			aa += a[k] * a[k]
			bb += b[k] * b[k]
		}
		spatial += ab / math.Sqrt(aa*bb)
	}
	spatial /= np / 2
	want := math.Pow(2, -2/(noiseFWHMVox*noiseFWHMVox))
	if math.Abs(spatial-want) > 0.05 {
		t.Errorf("neighbour correlation %.3f, want %.3f", spatial, want)
	}
	t.Logf("%d probes: rho %.3f (raw %.3f), noise SD %.4f of baseline, neighbour correlation %.3f (Gaussian %.3f)",
		len(probes), rho, a1, relSD, spatial, want)
}

// Regressing each region's mean time series on the count and watch
// regressors (the exact HRF convolution, checked against scipy in
// hrf_test.go) plus nuisance recovers the planted percent change.
func TestPlantedPercent(t *testing.T) {
	r := getRun1(t)
	s := r.s
	x := nuisanceDesign(t, s, s.reg["count"], s.reg["watch"])
	n, _ := x.Dims()
	for _, b := range s.Blobs {
		y := make([]float64, n)
		for _, v := range b.idx {
			for k, val := range r.series[r.probes[v]] {
				y[k] += val / float64(len(b.idx))
			}
		}
		var qr mat.QR
		qr.Factorize(x)
		var beta mat.VecDense
		if err := qr.SolveVecTo(&beta, false, mat.NewVecDense(n, y)); err != nil {
			t.Fatal(err)
		}
		base := beta.AtVec(2)
		count, watch := 100*beta.AtVec(0)/base, 100*beta.AtVec(1)/base
		wantC, wantW := b.Percent[0], b.Percent[1]
		// Within 25 % of the planted change (the scenario's brief): each
		// condition's effect, and count − watch where it is planted.
		scale := max(wantC, wantW)
		if math.Abs(count-wantC) > 0.25*scale || math.Abs(watch-wantW) > 0.25*scale {
			t.Errorf("%s: count %.3f %%, watch %.3f %%; planted %g %%, %g %%", b.Name, count, watch, wantC, wantW)
		}
		if d := wantC - wantW; d != 0 && math.Abs((count-watch)-d) > 0.25*d {
			t.Errorf("%s: count − watch %.3f %%, planted %g %%", b.Name, count-watch, d)
		}
		t.Logf("%s (%d voxels): count %.3f %% (planted %g), watch %.3f %% (planted %g)", b.Name, len(b.idx), count, wantC, watch, wantW)
	}
}

func BenchmarkStream(b *testing.B) {
	s := New(1)
	n := nx * ny * nz
	vol := make([]float32, n)
	b.SetBytes(int64(4 * n * s.Volumes))
	b.ReportAllocs()
	for b.Loop() {
		st := s.Stream()
		for st.Next(vol) == nil {
		}
	}
	b.ReportMetric(float64(s.Volumes)*float64(b.N)/b.Elapsed().Seconds(), "volumes/s")
}

func BenchmarkNew(b *testing.B) {
	b.ReportAllocs()
	for b.Loop() {
		New(1)
	}
}
