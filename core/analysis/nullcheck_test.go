package analysis

import (
	"context"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"gonum.org/v1/gonum/mathext"

	"winnow/core/contrast"
	"winnow/core/events"
	"winnow/core/glm"
	"winnow/core/infer"
	"winnow/core/nifti"
	"winnow/core/nullcheck"
	"winnow/core/report"
	"winnow/core/smooth"
)

// nullRun is a simulated run fitted like Fit does, with the null check's call sites
// (newNullCheck before the pass, AddVolume beside glm's, finishNullCheck after the fit).
type nullRun struct {
	res *FitResult
	nc  *chanceCheck
	fit *glm.Fit
	opt FitOptions
}

// eventTSV is a two-condition event-related design: 1 s events every 6–10 s (jittered),
// alternating faces and houses, over a run of 240 s.
func eventTSV() string {
	rng := rand.New(rand.NewPCG(21, 22))
	var b strings.Builder
	b.WriteString("onset\tduration\ttrial_type\n")
	names := []string{"faces", "houses"}
	t := 6.0
	for i := 0; t < 200; i++ {
		fmt.Fprintf(&b, "%.2f\t1\t%s\n", t, names[i%2])
		t += 6 + 4*rng.Float64()
	}
	return b.String()
}

// simulate streams a 20×20×14 run of 120 volumes (TR 2 s, 3 mm voxels) of spatially smooth
// (FWHM 2 voxels) AR(1) noise (ρ = 0.3) around 1000; with amp > 0 a block of 6×6×4 voxels
// also responds to "faces" with that amplitude. It fits the run with K chance designs.
const fwhmMM = 6 // 2 voxels

func simulate(t *testing.T, specs []string, k int, noise glm.Noise, amp float64) *nullRun {
	t.Helper()
	const n, tr = 120, 2.0
	dims := [3]int{20, 20, 14}
	nvox := dims[0] * dims[1] * dims[2]
	grid := nifti.Grid{Dims: dims, VoxelMM: [3]float64{3, 3, 3}, Affine: [4][4]float64{{3, 0, 0, 0}, {0, 3, 0, 0}, {0, 0, 3, 0}, {0, 0, 0, 1}}}
	ev, err := events.ParseEvents(strings.NewReader(eventTSV()))
	if err != nil {
		t.Fatal(err)
	}
	opt := FitOptions{Contrasts: specs, Noise: noise}
	opt.defaults()
	des, err := buildDesign(ev, nil, n, tr, opt, FitInputs{})
	if err != nil {
		t.Fatal(err)
	}
	var cons []*contrast.Contrast
	var weights [][][]float64
	for _, s := range specs {
		c, err := contrast.Parse(s, des.Names())
		if err != nil {
			t.Fatal(err)
		}
		cons = append(cons, c)
		weights = append(weights, c.Weights)
	}
	mask := make([]bool, nvox)
	for i := range mask {
		mask[i] = true
	}
	voxels := maskVoxels(mask)
	acc := glm.NewAccumulator(des.X, dims, voxels)
	nc, err := newNullCheck(k, ev, des, cons, opt, n, tr, dims, voxels, acc)
	if err != nil {
		t.Fatal(err)
	}
	sm := smooth.New(dims, smooth.Sigmas(fwhmMM, grid.VoxelMM), mask)
	rng := rand.New(rand.NewPCG(31, 32))
	white := make([]float32, nvox)
	eta := make([]float32, nvox)
	e := make([]float32, nvox)
	vol := make([]float32, nvox)
	const rho = 0.3
	for tt := range n {
		for i := range white {
			white[i] = float32(rng.NormFloat64())
		}
		sm.Float32(eta, white)
		x := des.X.At(tt, 0) // the "faces" column
		for i := range e {
			if tt == 0 {
				e[i] = eta[i]
			} else {
				e[i] = rho*e[i] + float32(math.Sqrt(1-rho*rho))*eta[i]
			}
			vol[i] = 1000 + 3*e[i]
			ii, jj, kk := i%dims[0], i/dims[0]%dims[1], i/(dims[0]*dims[1])
			if amp > 0 && ii >= 7 && ii < 13 && jj >= 7 && jj < 13 && kk >= 5 && kk < 9 {
				vol[i] += float32(amp * x)
			}
		}
		acc.AddVolume(vol)
		nc.AddVolume(vol)
	}
	fit, err := acc.Fit(glm.Options{Noise: noise, VoxelMM: grid.VoxelMM, Contrasts: weights})
	if err != nil {
		t.Fatal(err)
	}
	res := &FitResult{Grid: grid, Design: des, Summary: &report.Summary{}}
	res.finishMask(fit, make([]bool, nvox))
	res.fwhmVox = fit.FWHMVoxels
	res.resels = infer.CountResels(res.Mask, dims, fit.FWHMVoxels)
	return &nullRun{res: res, nc: nc, fit: fit, opt: opt}
}

// check runs the null check under one setting and returns its record.
func (nr *nullRun) check(t *testing.T, method infer.Method, alpha float64) report.NullCheck {
	t.Helper()
	o := nr.opt
	o.Correct, o.Alpha = method, alpha
	nr.res.Summary = &report.Summary{}
	if err := nr.res.finishNullCheck(context.Background(), nr.nc, nr.fit, o); err != nil {
		t.Fatal(err)
	}
	rec := *nr.res.Summary.NullCheck
	t.Logf("%s at %g: %s", method, alpha, nullcheck.Sentence(rec))
	return rec
}

// binomUpper is P(X ≥ x) for X ~ Binomial(k, p): I_p(x, k − x + 1) (the beta–binomial
// identity, common practice), 1 for x = 0.
func binomUpper(x, k int, p float64) float64 {
	if x == 0 {
		return 1
	}
	return mathext.RegIncBeta(float64(x), float64(k-x+1), p)
}

// TestNullCheckOnPureNoise: on pure smooth AR(1) noise, valid corrections (fwe-rft,
// bonferroni at 0.05) give a count of chance designs with a finding that is not
// significantly above K·α (one-sided binomial test at the 1 % level); the deliberately
// invalid setting (none at 0.001 over the whole 5600-voxel mask, where about 0.1 % of the
// voxels pass by chance, common practice) flags most chance designs (> 80 %) and warns.
func TestNullCheckOnPureNoise(t *testing.T) {
	const k = 40
	nr := simulate(t, []string{"diff=faces-houses"}, k, glm.NoiseDefault, 0)
	t.Logf("df %g, null df %g, FWHM %.2f voxels, resels %.1f", nr.fit.DF, nr.nc.acc.DF(), nr.fit.FWHMVoxels, nr.res.resels[3])
	for _, m := range []infer.Method{infer.MethodFWERFT, infer.MethodBonferroni} {
		rec := nr.check(t, m, 0.05)
		if rec.Designs != k {
			t.Fatalf("%d designs, want %d", rec.Designs, k)
		}
		if p := binomUpper(rec.WithFindings, k, 0.05); p < 0.01 {
			t.Errorf("%s: %d of %d chance designs with a finding; P(X ≥ %d) = %.3g under α = 0.05", m, rec.WithFindings, k, rec.WithFindings, p)
		}
		for _, w := range nr.res.Summary.Warnings {
			if strings.HasPrefix(w, "null check:") {
				t.Errorf("%s: unexpected warning %q", m, w)
			}
		}
	}
	rec := nr.check(t, infer.MethodNone, 0.001)
	if rec.WithFindings*10 <= 8*k {
		t.Errorf("none at 0.001: %d of %d chance designs with a finding, want more than 80 %%", rec.WithFindings, k)
	}
	warned := false
	for _, w := range nr.res.Summary.Warnings {
		warned = warned || strings.Contains(w, "do not control the familywise error")
	}
	if !warned {
		t.Errorf("none at 0.001: no warning in %q", nr.res.Summary.Warnings)
	}
}

// TestNullCheckActivationDoesNotLeak: with a strong planted response to "faces", the real
// conditions in every chance model absorb it, so the null rate under fwe-rft stays
// consistent with α (same binomial test), under fwe-rft and cluster-rft. An F contrast
// under --noise ols (ρ = 0, null df = real df − 2 chance columns) with the invalid setting
// flags most designs.
func TestNullCheckActivationDoesNotLeak(t *testing.T) {
	const k = 40
	nr := simulate(t, []string{"faces=faces"}, k, glm.NoiseDefault, 40)
	rec := nr.check(t, infer.MethodFWERFT, 0.05)
	if p := binomUpper(rec.WithFindings, k, 0.05); p < 0.01 {
		t.Errorf("fwe-rft with activation: %d of %d chance designs with a finding; P(X ≥ %d) = %.3g", rec.WithFindings, k, rec.WithFindings, p)
	}
	// The real fit does find the planted block (the data carry the response).
	if n := nr.realSurvivors(t, infer.MethodFWERFT, 0.05); n < 50 {
		t.Errorf("real contrast: %d surviving voxels, want the planted block (144 voxels)", n)
	}
	// Cluster-level inference at the default cluster-forming p = 0.001 (a strict one, where
	// parametric cluster inference holds its level; Eklund, Nichols & Knutsson 2016, PNAS):
	// same binomial test.
	rec = nr.check(t, infer.MethodClusterRFT, 0.05)
	if p := binomUpper(rec.WithFindings, k, 0.05); rec.Designs != k || p < 0.01 {
		t.Errorf("cluster-rft with activation: %d of %d chance designs with a finding; P(X ≥ %d) = %.3g", rec.WithFindings, rec.Designs, rec.WithFindings, p)
	}
	nr = simulate(t, []string{"both=faces, houses"}, 8, glm.NoiseOLS, 0)
	if nr.nc.acc.DF() != nr.fit.DF-2 {
		t.Errorf("null df %g, want the real df %g − 2", nr.nc.acc.DF(), nr.fit.DF)
	}
	rec = nr.check(t, infer.MethodNone, 0.001)
	if rec.WithFindings*10 <= 8*8 {
		t.Errorf("F, ols, none at 0.001: %d of 8", rec.WithFindings)
	}
}

// realSurvivors thresholds the real fit's first contrast like Fit does.
func (nr *nullRun) realSurvivors(t *testing.T, m infer.Method, alpha float64) int {
	st := nr.fit.Stats[0]
	cs := nullContrast("real", nullcheck.Stat{Stat: st.Stat, F: st.F, DF1: st.DF1, DF2: st.DF2}, nr.res, 1)
	var out report.Contrast
	nr.res.threshold(cs, &out, m, alpha, nr.opt.ClusterP)
	return out.SurvivingVoxels
}

// TestNullCheckRefusals: bad counts and contrasts with no chance counterpart are input
// errors naming --null-check; 0 switches the check off.
func TestNullCheckRefusals(t *testing.T) {
	ev, err := events.ParseEvents(strings.NewReader(eventTSV()))
	if err != nil {
		t.Fatal(err)
	}
	opt := FitOptions{}
	opt.defaults()
	des, err := buildDesign(ev, nil, 120, 2, opt, FitInputs{})
	if err != nil {
		t.Fatal(err)
	}
	c, err := contrast.Parse("mean=intercept", des.Names())
	if err != nil {
		t.Fatal(err)
	}
	dims := [3]int{2, 2, 1}
	vox := []int32{0, 1, 2, 3}
	if nc, err := newNullCheck(0, ev, des, []*contrast.Contrast{c}, opt, 120, 2, dims, vox, nil); nc != nil || err != nil {
		t.Errorf("k = 0: %v %v", nc, err)
	}
	for _, k := range []int{-1, nullcheck.MaxDesigns + 1} {
		_, err := newNullCheck(k, ev, des, nil, opt, 120, 2, dims, vox, nil)
		var ie *InputError
		if !errors.As(err, &ie) || ie.File != "--null-check" {
			t.Errorf("k = %d: %v", k, err)
		}
	}
	_, err = newNullCheck(5, ev, des, []*contrast.Contrast{c}, opt, 120, 2, dims, vox, nil)
	if err == nil || !strings.Contains(err.Error(), `"intercept"`) || !strings.Contains(err.Error(), "--null-check") {
		t.Errorf("intercept contrast: %v", err)
	}
}

// TestNullFloorSameSurvivors: skipping the ln p and z conversion below pFloor (nullContrast)
// leaves every method's survivors unchanged against the full conversion (pFloor = 1), on the
// chance maps of a pure-noise run at loose and strict alphas.
func TestNullFloorSameSurvivors(t *testing.T) {
	nr := simulate(t, []string{"diff=faces-houses", "both=faces, houses"}, 2, glm.NoiseDefault, 0)
	methods := []infer.Method{infer.MethodNone, infer.MethodBonferroni, infer.MethodHolm, infer.MethodFDRBH, infer.MethodFDRBY, infer.MethodFWERFT, infer.MethodClusterRFT}
	n := 0
	err := nr.nc.acc.Solve(nr.fit.Rho, nr.fit.Valid, nr.nc.weights, func(d int, stats []nullcheck.Stat) error {
		for _, st := range stats {
			full := nullContrast("c", st, nr.res, 1)
			for _, m := range methods {
				for _, a := range []float64{0.5, 0.05, 0.001} {
					cp := 0.01
					floor := a
					if m.ClusterLevel() {
						floor = math.Max(a, cp)
					}
					fast := nullContrast("c", st, nr.res, floor)
					var o1, o2 report.Contrast
					nr.res.threshold(full, &o1, m, a, cp)
					nr.res.threshold(fast, &o2, m, a, cp)
					same := o1.SurvivingVoxels == o2.SurvivingVoxels
					for k := range full.survive {
						same = same && full.survive[k] == fast.survive[k]
					}
					if !same {
						t.Errorf("design %d, %s at %g: %d survivors with the floor, %d without", d, m, a, o2.SurvivingVoxels, o1.SurvivingVoxels)
					}
					n += o1.SurvivingVoxels
				}
			}
		}
		return nil
	})
	if err != nil || n == 0 {
		t.Fatalf("%v; %d survivors in all (want some, so that the comparison means something)", err, n)
	}
}
