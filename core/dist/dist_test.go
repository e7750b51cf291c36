package dist

import (
	"encoding/json"
	"math"
	"os"
	"testing"

	"gonum.org/v1/gonum/stat/distuv"
)

// reference is testdata/dist/tz_reference.json: records trimmed from the project's reference
// set (tz_conversions.json). The columns sf, log_sf and z are 60-digit mpmath values; R_* are
// R 4.2.2 pt/pf/qnorm(log.p = TRUE) values kept for information. See testdata/dist/README.md.
type reference struct {
	T []struct {
		T, DF, SF, Z float64
		LogSF        float64 `json:"log_sf"`
		RLogSF       float64 `json:"R_log_sf"`
		RZ           float64 `json:"R_z"`
	} `json:"t"`
	F []struct {
		F, DF1, DF2, SF, Z float64
		LogSF              float64 `json:"log_sf"`
	} `json:"F"`
	F1 []struct {
		T, DF, F  float64
		TwoSidedP float64 `json:"two_sided_t_p"`
		FP        float64 `json:"F_p"`
	} `json:"F1_equals_two_sided_t"`
	ZQuantiles []struct {
		P, Z float64
	} `json:"z_quantiles"`
	ZFromLogP []struct {
		LogP float64 `json:"log_p"`
		Z    float64
	} `json:"z_from_log_p"`
	NormalTail []struct {
		Z, SF float64
		LogSF float64 `json:"log_sf"`
		Naive float64 `json:"naive_one_minus_cdf"`
	} `json:"normal_tail"`
}

func loadReference(t *testing.T) *reference {
	t.Helper()
	b, err := os.ReadFile("../../testdata/dist/tz_reference.json")
	if err != nil {
		t.Fatal(err)
	}
	var r reference
	// encoding/json matches field names case-insensitively; the tags cover the rest.
	type alias reference
	if err := json.Unmarshal(b, (*alias)(&r)); err != nil {
		t.Fatal(err)
	}
	if len(r.T) == 0 || len(r.F) == 0 || len(r.ZQuantiles) == 0 || len(r.ZFromLogP) == 0 {
		t.Fatal("reference file is missing records")
	}
	return &r
}

func relErr(got, want float64) float64 {
	if got == want {
		return 0
	}
	return math.Abs(got-want) / math.Abs(want)
}

// tol is the suggested tolerance of the reference set's README: 1e-12 relative on ln p and z.
const tol = 1e-12

func TestTReference(t *testing.T) {
	r := loadReference(t)
	var worstP, worstZ float64
	for _, c := range r.T {
		lp := TLogSF(c.T, c.DF)
		if e := relErr(lp, c.LogSF); e > tol {
			t.Errorf("TLogSF(%g, %g) = %.17g, mpmath %.17g (rel %.2g)", c.T, c.DF, lp, c.LogSF, e)
		} else {
			worstP = math.Max(worstP, e)
		}
		z := TToZ(c.T, c.DF)
		if e := relErr(z, c.Z); e > tol {
			t.Errorf("TToZ(%g, %g) = %.17g, mpmath %.17g (rel %.2g)", c.T, c.DF, z, c.Z, e)
		} else {
			worstZ = math.Max(worstZ, e)
		}
		// Symmetry (methods c.4): z(-t) = -z(t).
		if zn := TToZ(-c.T, c.DF); zn != -z {
			t.Errorf("TToZ(%g) = %g, want %g", -c.T, zn, -z)
		}
		// Inverse: t from the reference ln p.
		if back := TFromLogSF(c.LogSF, c.DF); relErr(back, c.T) > tol {
			t.Errorf("TFromLogSF(%.17g, %g) = %.17g, want %g", c.LogSF, c.DF, back, c.T)
		}
	}
	t.Logf("t grid (%d records): worst relative error ln p %.2g, z %.2g", len(r.T), worstP, worstZ)
}

func TestFReference(t *testing.T) {
	r := loadReference(t)
	var worstP, worstZ float64
	for _, c := range r.F {
		lp := FLogSF(c.F, c.DF1, c.DF2)
		if e := relErr(lp, c.LogSF); e > tol {
			t.Errorf("FLogSF(%g, %g, %g) = %.17g, mpmath %.17g (rel %.2g)", c.F, c.DF1, c.DF2, lp, c.LogSF, e)
		} else {
			worstP = math.Max(worstP, e)
		}
		z := FToZ(c.F, c.DF1, c.DF2)
		if e := relErr(z, c.Z); e > tol {
			t.Errorf("FToZ(%g, %g, %g) = %.17g, mpmath %.17g (rel %.2g)", c.F, c.DF1, c.DF2, z, c.Z, e)
		} else {
			worstZ = math.Max(worstZ, e)
		}
		if back := FFromLogSF(c.LogSF, c.DF1, c.DF2); relErr(back, c.F) > tol {
			t.Errorf("FFromLogSF(%.17g, %g, %g) = %.17g, want %g", c.LogSF, c.DF1, c.DF2, back, c.F)
		}
	}
	t.Logf("F grid (%d records): worst relative error ln p %.2g, z %.2g", len(r.F), worstP, worstZ)
	// F(1, ν) at t² is the two-sided t p (reference F1_equals_two_sided_t, mpmath).
	for _, c := range r.F1 {
		if e := relErr(math.Exp(FLogSF(c.F, 1, c.DF)), c.FP); e > tol {
			t.Errorf("P(F(1,%g) >= %g) rel err %.2g", c.DF, c.F, e)
		}
		if e := relErr(math.Exp(TLogSF(c.T, c.DF)+math.Ln2), c.TwoSidedP); e > tol {
			t.Errorf("2 P(T(%g) >= %g) rel err %.2g", c.DF, c.T, e)
		}
	}
}

func TestZReference(t *testing.T) {
	r := loadReference(t)
	for _, c := range r.ZQuantiles {
		z := ZFromLogSF(math.Log(c.P))
		if e := relErr(z, c.Z); e > tol {
			t.Errorf("z(p=%g) = %.17g, mpmath %.17g (rel %.2g)", c.P, z, c.Z, e)
		}
	}
	for _, c := range r.ZFromLogP {
		// R's qnorm(log.p = TRUE) loses accuracy below ln p = -1000 (reference README); the
		// test is against the mpmath column.
		z := ZFromLogSF(c.LogP)
		if e := relErr(z, c.Z); e > tol {
			t.Errorf("ZFromLogSF(%g) = %.17g, mpmath %.17g (rel %.2g)", c.LogP, z, c.Z, e)
		}
	}
	for _, c := range r.NormalTail {
		lp := NormLogSF(c.Z)
		if e := relErr(lp, c.LogSF); e > tol {
			t.Errorf("NormLogSF(%g) = %.17g, mpmath %.17g (rel %.2g)", c.Z, lp, c.LogSF, e)
		}
		// The naive 1 - cdf column of the fixture is exactly 0 from z = 8.3 on; ours stays
		// finite and exact.
		if c.Naive == 0 && math.IsInf(lp, 0) {
			t.Errorf("NormLogSF(%g) = %g", c.Z, lp)
		}
	}
}

// Quick anchors quoted in methods c.4 (mpmath) and the task's R values (pt / qnorm).
func TestAnchors(t *testing.T) {
	for _, c := range []struct{ p, z float64 }{
		{0.05, 1.6448536269514726}, {1e-3, 3.0902323061678136},
		{1e-6, 4.753424308822899}, {1e-12, 7.034483825301132},
	} {
		if e := relErr(ZFromLogSF(math.Log(c.p)), c.z); e > tol {
			t.Errorf("z(%g) rel err %.2g", c.p, e)
		}
	}
	// R 4.2: pt(3, 20, lower.tail = FALSE), qnorm(that, lower.tail = FALSE).
	if e := relErr(math.Exp(TLogSF(3, 20)), 0.0035379493956055486); e > tol {
		t.Errorf("p(t=3, df=20) rel err %.2g", e)
	}
	if e := relErr(TToZ(3, 20), 2.6932509491690055); e > tol {
		t.Errorf("z(t=3, df=20) rel err %.2g", e)
	}
	if e := relErr(math.Exp(TLogSF(40, 100)), 1.2310538010700368e-63); e > tol {
		t.Errorf("p(t=40, df=100) rel err %.2g", e)
	}
	if e := relErr(TToZ(40, 100), 16.799475684947815); e > tol {
		t.Errorf("z(t=40, df=100) rel err %.2g", e)
	}
}

// Identities: z -> ln p -> z round trip down to ln p = -1e5 and for negative z; ln p -> z ->
// ln p likewise.
func TestRoundTrip(t *testing.T) {
	for z := -37.0; z <= 447; z += 0.37 { // below -37.5 the lower tail is below the smallest double
		lp := NormLogSF(z)
		back := ZFromLogSF(lp)
		if math.Abs(back-z) > tol*math.Max(1, math.Abs(z)) {
			t.Errorf("ZFromLogSF(NormLogSF(%g)) = %.17g", z, back)
		}
	}
	for _, lp := range []float64{-1e-300, -1e-20, -1e-8, -0.1, -0.69, -0.7, -1, -2, -50, -700, -745, -800, -5000, -1e5} {
		z := ZFromLogSF(lp)
		if e := relErr(NormLogSF(z), lp); e > tol && math.Abs(NormLogSF(z)-lp) > 1e-300 {
			t.Errorf("NormLogSF(ZFromLogSF(%g)) rel err %.2g", lp, e)
		}
	}
	// Continuity of NormLogSF across the switch to the asymptotic series at z = 30.
	a, b := NormLogSF(math.Nextafter(30, 0)), NormLogSF(30)
	if relErr(a, b) > 1e-14 {
		t.Errorf("NormLogSF jumps at 30: %.17g vs %.17g", a, b)
	}
	for _, df := range []float64{1, 2.5, 7, 30, 1000} {
		for _, lp := range []float64{-0.01, -0.5, -3, -30, -300, -3000} {
			tt := TFromLogSF(lp, df)
			if math.IsInf(tt, 1) {
				continue // beyond the largest double for this df
			}
			if e := relErr(TLogSF(tt, df), lp); e > tol {
				t.Errorf("TLogSF(TFromLogSF(%g, %g)) rel err %.2g", lp, df, e)
			}
		}
		for _, df1 := range []float64{1, 3, 12} {
			for _, lp := range []float64{-0.01, -0.5, -3, -30, -300} {
				f := FFromLogSF(lp, df1, df)
				if math.IsInf(f, 1) {
					continue
				}
				if e := relErr(FLogSF(f, df1, df), lp); e > tol {
					t.Errorf("FLogSF(FFromLogSF(%g, %g, %g)) = %.17g rel err %.2g", lp, df1, df, FLogSF(f, df1, df), e)
				}
			}
		}
	}
}

// Cross-check against gonum's distuv in the moderate range (independent implementation).
func TestGonumModerate(t *testing.T) {
	for _, df := range []float64{1, 3, 8.5, 40, 300} {
		st := distuv.StudentsT{Mu: 0, Sigma: 1, Nu: df}
		for x := -6.0; x <= 6; x += 0.25 {
			want := st.Survival(x)
			if e := relErr(math.Exp(TLogSF(x, df)), want); e > 1e-9 {
				t.Errorf("t(%g) sf at %g: rel err %.2g against gonum", df, x, e)
			}
		}
		for _, df1 := range []float64{1, 2, 5} {
			fd := distuv.F{D1: df1, D2: df}
			for x := 0.05; x <= 8; x += 0.2 {
				want := fd.Survival(x)
				if e := relErr(math.Exp(FLogSF(x, df1, df)), want); e > 1e-9 {
					t.Errorf("F(%g,%g) sf at %g: rel err %.2g against gonum", df1, df, x, e)
				}
				if want > 1e-3 && want < 1-1e-3 {
					zg := distuv.UnitNormal.Quantile(1 - want)
					if math.Abs(FToZ(x, df1, df)-zg) > 1e-8 {
						t.Errorf("FToZ(%g,%g,%g) = %g, gonum %g", x, df1, df, FToZ(x, df1, df), zg)
					}
				}
			}
		}
	}
	// A huge df approaches the normal (the difference is of order 1/df); +Inf is the normal.
	for _, x := range []float64{-3, 0.5, 2, 5, 9} {
		if e := relErr(TLogSF(x, 1e8), NormLogSF(x)); e > 1e-6 {
			t.Errorf("TLogSF(%g, 1e8) rel %.2g from normal", x, e)
		}
		if TLogSF(x, math.Inf(1)) != NormLogSF(x) {
			t.Errorf("TLogSF(%g, Inf) differs from normal", x)
		}
	}
}

func TestEdges(t *testing.T) {
	for _, v := range []float64{TLogSF(math.NaN(), 5), TLogSF(1, 0), TLogSF(1, -2), FLogSF(1, 0, 5),
		ZFromLogSF(0.1), ZFromLogSF(math.NaN()), TFromLogSF(0.5, 5), FFromLogSF(-1, 2, -1)} {
		if !math.IsNaN(v) {
			t.Errorf("invalid input gave %g, want NaN", v)
		}
	}
	if TLogSF(0, 7) != -math.Ln2 || TToZ(0, 7) != 0 {
		t.Error("t = 0 must give p = ½ and z = 0")
	}
	if !math.IsInf(TLogSF(math.Inf(1), 7), -1) || !math.IsInf(TToZ(math.Inf(1), 7), 1) {
		t.Error("t = +Inf")
	}
	if FLogSF(0, 2, 7) != 0 || FLogSF(-1, 2, 7) != 0 || !math.IsInf(FToZ(0, 2, 7), -1) {
		t.Error("F <= 0 must give p = 1")
	}
	if !math.IsInf(ZFromLogSF(math.Inf(-1)), 1) || !math.IsInf(ZFromLogSF(0), -1) {
		t.Error("ZFromLogSF limits")
	}
	// Beyond double range: t huge with small df.
	if v := TFromLogSF(-1e5, 3); !math.IsInf(v, 1) {
		t.Errorf("TFromLogSF(-1e5, 3) = %g, want +Inf (beyond double)", v)
	}
}

// LogBeta against mpmath 1.3.0 log(beta(a, b)) at 40 digits, computed for this test (see
// testdata/dist/README.md); the large-argument cases are where two large lgamma values
// would cancel.
func TestLogBeta(t *testing.T) {
	for _, c := range []struct{ a, b, want float64 }{
		{0.5, 1e8, -8.637975427801482649},
		{0.5, 5e11, -12.896572024759351362},
		{3.5, 250, -18.141570015697508627},
		{100, 300, -226.17296059614622087},
		{0.5, 2.5, 0.16390063283767393729},
	} {
		if e := relErr(LogBeta(c.a, c.b), c.want); e > 1e-14 {
			t.Errorf("LogBeta(%g, %g) = %.17g, mpmath %.17g (rel %.2g)", c.a, c.b, LogBeta(c.a, c.b), c.want, e)
		}
		if LogBeta(c.b, c.a) != LogBeta(c.a, c.b) {
			t.Errorf("LogBeta not symmetric at (%g, %g)", c.a, c.b)
		}
	}
}
