package glm

import (
	"encoding/json"
	"math"
	"os"
	"testing"

	"gonum.org/v1/gonum/mat"
)

type olsRec struct {
	Params   []float64 `json:"params"`
	BSE      []float64 `json:"bse"`
	T        []float64 `json:"tvalues"`
	DF       float64   `json:"df_resid"`
	Sigma2   float64   `json:"sigma2"`
	RSS      float64   `json:"rss"`
	Contrast struct {
		C      []float64 `json:"c"`
		Effect float64   `json:"effect"`
		SE     float64   `json:"se"`
		T      float64   `json:"t"`
	} `json:"contrast"`
	FTest struct {
		R     [][]float64 `json:"R"`
		F     float64     `json:"F"`
		DFNum float64     `json:"df_num"`
		DFDen float64     `json:"df_denom"`
	} `json:"F_test"`
}

type olsAR1Fixture struct {
	N          int         `json:"n"`
	X          [][]float64 `json:"X"`
	Y          [][]float64 `json:"Y"`
	DesignSums struct {
		Sxx [][]float64 `json:"Sxx"`
		P1  [][]float64 `json:"P_sum_xt_xtm1T"`
		P2  [][]float64 `json:"P2_sum_xt_xtm2T"`
		X1  []float64   `json:"x_first"`
		Xn  []float64   `json:"x_last"`
		M   [][]float64 `json:"bias_matrix_M"`
	} `json:"design_sums"`
	Columns []struct {
		OLS olsRec `json:"ols"`
		GLS struct {
			Rho       float64   `json:"rho"`
			Params    []float64 `json:"params"`
			BSE       []float64 `json:"bse"`
			T         []float64 `json:"tvalues"`
			DF        float64   `json:"df_resid"`
			ContrastT float64   `json:"contrast_t"`
			PWRSS     float64   `json:"prais_winsten_rss"`
			PWSigma2  float64   `json:"prais_winsten_sigma2_innovation"`
		} `json:"gls_known_rho"`
		Sums struct {
			Syy, Lyy float64
			Sxy      []float64 `json:"Sxy"`
			A        []float64 `json:"A_sum_xt_ytm1"`
			B        []float64 `json:"B_sum_xtm1_yt"`
			YFirst   float64   `json:"y_first"`
			YLast    float64   `json:"y_last"`
		} `json:"streaming_sums"`
		AR1 struct {
			A0       float64 `json:"a0_rss"`
			A1       float64 `json:"a1_lag1"`
			RhoRaw   float64 `json:"rho_raw"`
			RhoBR    float64 `json:"rho_bias_reduced"`
			GLSAtRho struct {
				Params    []float64 `json:"params"`
				T         []float64 `json:"tvalues"`
				ContrastT float64   `json:"contrast_t"`
				DF        float64   `json:"df_resid"`
			} `json:"gls_at_rho_bias_reduced"`
		} `json:"ar1_estimate"`
	} `json:"columns"`
}

func loadFixture(t *testing.T) *olsAR1Fixture {
	t.Helper()
	b, err := os.ReadFile("../../testdata/glm/ols_ar1_fixture.json")
	if err != nil {
		t.Fatal(err)
	}
	var f olsAR1Fixture
	if err := json.Unmarshal(b, &f); err != nil {
		t.Fatal(err)
	}
	if len(f.Columns) == 0 || len(f.X) != f.N || len(f.Y) != f.N {
		t.Fatal("fixture incomplete")
	}
	return &f
}

// relErr compares with a relative tolerance, falling back to absolute near zero.
func checkRel(t *testing.T, what string, got, want, tol float64) {
	t.Helper()
	if !(math.Abs(got-want) <= tol*math.Max(math.Abs(want), 1e-300)) {
		if math.Abs(want) < 1e-6 && math.Abs(got-want) <= tol {
			return
		}
		t.Errorf("%s = %.15g, want %.15g (rel err %.3g)", what, got, want, math.Abs(got-want)/math.Abs(want))
	}
}

// fixtureAcc streams the fixture's Y columns as five voxels of a 5x1x1 grid.
func fixtureAcc(f *olsAR1Fixture) *Accumulator {
	p := len(f.X[0])
	x := mat.NewDense(f.N, p, nil)
	for t, r := range f.X {
		x.SetRow(t, r)
	}
	nvox := len(f.Y[0])
	vox := make([]int32, nvox)
	for i := range vox {
		vox[i] = int32(i)
	}
	a := NewAccumulator(x, [3]int{nvox, 1, 1}, vox)
	for _, row := range f.Y {
		a.AddVolume64(row)
	}
	return a
}

func unitRows(p int) [][][]float64 {
	out := make([][][]float64, p)
	for j := range out {
		r := make([]float64, p)
		r[j] = 1
		out[j] = [][]float64{r}
	}
	return out
}

const fixTol = 1e-9 // testdata/glm/README.md: suggested tolerance

// Source: ols_ar1_fixture.json design_sums (own numpy 1.24.2, M checked against explicit
// n x n traces).
func TestFixtureDesignSums(t *testing.T) {
	f := loadFixture(t)
	a := fixtureAcc(f)
	d, err := newDesign(a.x, a.n, a.p)
	if err != nil {
		t.Fatal(err)
	}
	p := a.p
	for j := 0; j < p; j++ {
		for k := 0; k < p; k++ {
			checkRel(t, "Sxx", d.sxx[j*p+k], f.DesignSums.Sxx[j][k], fixTol)
			checkRel(t, "P1", d.p1[j*p+k], f.DesignSums.P1[j][k], fixTol)
			checkRel(t, "P2", d.p2[j*p+k], f.DesignSums.P2[j][k], fixTol)
		}
		checkRel(t, "x1", d.x1[j], f.DesignSums.X1[j], fixTol)
		checkRel(t, "xn", d.xn[j], f.DesignSums.Xn[j], fixTol)
	}
	for i := 0; i < 2; i++ {
		for k := 0; k < 2; k++ {
			checkRel(t, "M", d.m[i][k], f.DesignSums.M[i][k], fixTol)
		}
	}
	if !d.hasConst {
		t.Error("intercept not detected in the column space")
	}
}

// Source: ols_ar1_fixture.json streaming_sums and ar1_estimate (own numpy 1.24.2; the sums
// are of the raw series, so the offset sums are converted back exactly for the comparison).
func TestFixtureSumsAndAR1(t *testing.T) {
	f := loadFixture(t)
	a := fixtureAcc(f)
	a.flush()
	d, err := newDesign(a.x, a.n, a.p)
	if err != nil {
		t.Fatal(err)
	}
	raw := *d
	raw.hasConst = false // makes load undo the first-sample offset
	s := newVoxSums(a.p)
	beta := make([]float64, a.p)
	for v, c := range f.Columns {
		if !a.load(&raw, v, s) {
			t.Fatalf("voxel %d: non-finite sums", v)
		}
		checkRel(t, "Syy", s.syy, c.Sums.Syy, fixTol)
		checkRel(t, "Lyy", s.lyy, c.Sums.Lyy, fixTol)
		checkRel(t, "y_first", s.y1, c.Sums.YFirst, fixTol)
		checkRel(t, "y_last", s.yn, c.Sums.YLast, fixTol)
		for j := range s.sxy {
			checkRel(t, "Sxy", s.sxy[j], c.Sums.Sxy[j], fixTol)
			checkRel(t, "Axy", s.axy[j], c.Sums.A[j], fixTol)
			checkRel(t, "Bxy", s.bxy[j], c.Sums.B[j], fixTol)
		}
		// a0, a1 and ρ from the offset sums (the fit's path).
		a.load(d, v, s)
		a0, a1 := d.ols(s, beta)
		checkRel(t, "a0", a0, c.AR1.A0, fixTol)
		checkRel(t, "a1", a1, c.AR1.A1, fixTol)
		checkRel(t, "rho raw", a1/a0, c.AR1.RhoRaw, fixTol)
		checkRel(t, "rho bias-reduced", d.biasReduced(a0, a1), c.AR1.RhoBR, fixTol)
	}
}

// Source: ols_ar1_fixture.json columns[*].ols (statsmodels 0.13.5 OLS.fit, t_test, f_test).
func TestFixtureOLS(t *testing.T) {
	f := loadFixture(t)
	a := fixtureAcc(f)
	c0 := f.Columns[0].OLS
	cons := append(unitRows(a.p), [][]float64{c0.Contrast.C}, c0.FTest.R)
	fit, err := a.Fit(Options{Noise: NoiseOLS, Contrasts: cons})
	if err != nil {
		t.Fatal(err)
	}
	p := a.p
	for v, c := range f.Columns {
		o := c.OLS
		if fit.DF != o.DF {
			t.Errorf("df = %g, want %g", fit.DF, o.DF)
		}
		for j := 0; j < p; j++ {
			checkRel(t, "beta", fit.Beta(j)[v], o.Params[j], fixTol)
			checkRel(t, "se", fit.Stats[j].SE[v], o.BSE[j], fixTol)
			checkRel(t, "t", fit.Stats[j].Stat[v], o.T[j], fixTol)
		}
		checkRel(t, "sigma2", fit.Sigma2[v], o.Sigma2, fixTol)
		checkRel(t, "rss", fit.Sigma2[v]*fit.DF, o.RSS, fixTol)
		ct := fit.Stats[p]
		checkRel(t, "contrast effect", ct.Effect[v], o.Contrast.Effect, fixTol)
		checkRel(t, "contrast se", ct.SE[v], o.Contrast.SE, fixTol)
		checkRel(t, "contrast t", ct.Stat[v], o.Contrast.T, fixTol)
		ft := fit.Stats[p+1]
		if !ft.F || ft.DF1 != o.FTest.DFNum || ft.DF2 != o.FTest.DFDen {
			t.Errorf("F df (%v, %g, %g), want (true, %g, %g)", ft.F, ft.DF1, ft.DF2, o.FTest.DFNum, o.FTest.DFDen)
		}
		checkRel(t, "F", ft.Stat[v], o.FTest.F, fixTol)
		if fit.Rho[v] != 0 {
			t.Errorf("OLS whitening ρ = %g, want 0", fit.Rho[v])
		}
	}
	// Post-hoc Contrast gives the same numbers (same formulas, factor recomputed).
	st, err := fit.Contrast(cons[p])
	if err != nil {
		t.Fatal(err)
	}
	for v := range f.Columns {
		checkRel(t, "post-hoc t", st.Stat[v], fit.Stats[p].Stat[v], 1e-13)
	}
}

// Source: ols_ar1_fixture.json gls_known_rho (statsmodels 0.13.5 GLS with sigma =
// toeplitz(0.4^k)); σ² is the Prais–Winsten innovation variance stored beside it.
func TestFixtureGLSKnownRho(t *testing.T) {
	f := loadFixture(t)
	a := fixtureAcc(f)
	c0 := f.Columns[0].OLS
	rho := f.Columns[0].GLS.Rho
	cons := append(unitRows(a.p), [][]float64{c0.Contrast.C})
	fit, err := a.Fit(Options{FixedRho: &rho, Contrasts: cons})
	if err != nil {
		t.Fatal(err)
	}
	p := a.p
	for v, c := range f.Columns {
		g := c.GLS
		if g.Rho != rho {
			t.Fatalf("fixture ρ differs between columns")
		}
		for j := 0; j < p; j++ {
			checkRel(t, "gls beta", fit.Beta(j)[v], g.Params[j], fixTol)
			checkRel(t, "gls se", fit.Stats[j].SE[v], g.BSE[j], fixTol)
			checkRel(t, "gls t", fit.Stats[j].Stat[v], g.T[j], fixTol)
		}
		checkRel(t, "gls contrast t", fit.Stats[p].Stat[v], g.ContrastT, fixTol)
		checkRel(t, "gls sigma2 (innovation)", fit.Sigma2[v], g.PWSigma2, fixTol)
		checkRel(t, "gls rss", fit.Sigma2[v]*fit.DF, g.PWRSS, fixTol)
	}
}

// Source: ols_ar1_fixture.json ar1_estimate.gls_at_rho_bias_reduced (Prais–Winsten OLS via
// statsmodels 0.13.5 at the bias-reduced ρ̂); spatial smoothing of ρ off.
func TestFixtureGLSEstimatedRho(t *testing.T) {
	f := loadFixture(t)
	a := fixtureAcc(f)
	c0 := f.Columns[0].OLS
	cons := append(unitRows(a.p), [][]float64{c0.Contrast.C})
	fit, err := a.Fit(Options{Noise: NoiseAR1, RhoFWHMmm: -1, Contrasts: cons})
	if err != nil {
		t.Fatal(err)
	}
	p := a.p
	for v, c := range f.Columns {
		e := c.AR1
		want := min(max(e.RhoBR, RhoMin), RhoMax)
		checkRel(t, "rho", fit.Rho[v], want, fixTol)
		checkRel(t, "rho voxel", fit.RhoVoxel[v], want, fixTol)
		if fit.DF != e.GLSAtRho.DF {
			t.Errorf("df %g, want %g", fit.DF, e.GLSAtRho.DF)
		}
		for j := 0; j < p; j++ {
			checkRel(t, "beta", fit.Beta(j)[v], e.GLSAtRho.Params[j], fixTol)
			checkRel(t, "t", fit.Stats[j].Stat[v], e.GLSAtRho.T[j], fixTol)
		}
		checkRel(t, "contrast t", fit.Stats[p].Stat[v], e.GLSAtRho.ContrastT, fixTol)
		// Mean map: the time mean of the stored series (identity).
		m := 0.0
		for _, row := range f.Y {
			m += row[v]
		}
		checkRel(t, "mean", fit.Mean[v], m/float64(f.N), 1e-12)
	}
}
