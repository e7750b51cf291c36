package infer

import (
	"encoding/json"
	"math"
	"os"
	"testing"
)

// ecReference is testdata/infer/ec_rft.json, a copy of the project reference set's file:
// closed forms of Worsley et al. 1996 evaluated with numpy 1.24 / scipy 1.10 (ρ0 by scipy
// sf), numpy lattice counting, scipy brentq thresholds and the Friston et al. 1994 cluster
// table. Suggested tolerance 1e-10 relative.
type ecReference struct {
	Densities map[string][]struct {
		U   float64
		Rho [4]float64
	}
	Resels map[string]json.RawMessage
	Voxel  struct {
		NVoxels int     `json:"n_voxels"`
		Alpha   float64 `json:"alpha"`
		Rows    []struct {
			FWHM     float64 `json:"fwhm_vox"`
			R        [4]float64
			ZRFT     float64 `json:"z_rft"`
			ZBonf    float64 `json:"z_bonferroni"`
			T20RFT   float64 `json:"t20_rft"`
			T20Bonf  float64 `json:"t20_bonferroni"`
			T100RFT  float64 `json:"t100_rft"`
			T100Bonf float64 `json:"t100_bonferroni"`
		}
	} `json:"voxel_thresholds"`
	Cluster struct {
		Rows []struct {
			FWHM     float64 `json:"fwhm_vox"`
			CDP      float64 `json:"cluster_defining_p"`
			U        float64
			EM       float64   `json:"expected_clusters"`
			EN       float64   `json:"expected_voxels_above"`
			En       float64   `json:"expected_cluster_size_vox"`
			Beta     float64   `json:"beta"`
			K        []float64 `json:"k"`
			PSize    []float64 `json:"P_size_ge_k"`
			PCorr    []float64 `json:"p_corrected"`
			KCrit005 float64   `json:"k_critical_alpha_0_05"`
		}
	} `json:"cluster_extent"`
}

type reselCase struct {
	Counts map[string]int
	R      [4]float64
}

func loadEC(t *testing.T) *ecReference {
	t.Helper()
	b, err := os.ReadFile("../../testdata/infer/ec_rft.json")
	if err != nil {
		t.Fatal(err)
	}
	var r ecReference
	if err := json.Unmarshal(b, &r); err != nil {
		t.Fatal(err)
	}
	if len(r.Densities) != 5 || len(r.Voxel.Rows) == 0 || len(r.Cluster.Rows) == 0 {
		t.Fatal("ec_rft.json is missing records")
	}
	return &r
}

func rel(got, want float64) float64 {
	if got == want {
		return 0
	}
	return math.Abs(got-want) / math.Abs(want)
}

func TestECDensitiesReference(t *testing.T) {
	r := loadEC(t)
	fields := map[string]Field{
		"Z":          {Kind: FieldZ},
		"t_df20":     {Kind: FieldT, DF2: 20},
		"t_df100":    {Kind: FieldT, DF2: 100},
		"F_k2_df50":  {Kind: FieldF, DF1: 2, DF2: 50},
		"F_k3_df100": {Kind: FieldF, DF1: 3, DF2: 100},
	}
	worst := 0.0
	for name, f := range fields {
		rows := r.Densities[name]
		if len(rows) == 0 {
			t.Fatalf("no densities for %s", name)
		}
		for _, row := range rows {
			got := ECDensities(f, row.U)
			for d := 0; d < 4; d++ {
				e := rel(got[d], row.Rho[d])
				worst = math.Max(worst, e)
				if e > 1e-10 {
					t.Errorf("%s u=%g ρ%d = %.17g, reference %.17g (rel %.2g)", name, row.U, d, got[d], row.Rho[d], e)
				}
			}
		}
	}
	t.Logf("EC densities: worst relative difference %.2g", worst)
}

// Identities of methods f.4 (ec_rft.json density_checks): t with ν = 1e9 matches Z (to 8e-7
// in the reference); F with k = 1 at u = t² is exactly 2× the t densities; the Gaussian
// ρ_{d+1} = sqrt(λ/2π)·(−dρ_d/du).
func TestECDensityIdentities(t *testing.T) {
	for _, u := range []float64{2, 3, 4, 5} {
		z := ECDensities(Field{Kind: FieldZ}, u)
		tt := ECDensities(Field{Kind: FieldT, DF2: 1e9}, u)
		for d := range z {
			if e := rel(tt[d], z[d]); e > 1e-6 {
				t.Errorf("t(1e9) ρ%d at %g: rel %.2g from Z", d, u, e)
			}
		}
		// Just below the switch to the normal the t forms themselves are used; they differ
		// from Z by about (u⁴/4 + u²/2)/ν in relative terms (the expansion of ln Q).
		t8 := ECDensities(Field{Kind: FieldT, DF2: 1e8}, u)
		for d := range z {
			if e := rel(t8[d], z[d]); e > 2*(u*u*u*u/4+u*u/2)/1e8 {
				t.Errorf("t(1e8) ρ%d at %g: rel %.2g from Z", d, u, e)
			}
		}
		for d := 0; d < 3; d++ {
			h := 1e-5
			der := -(ECDensities(Field{Kind: FieldZ}, u+h)[d] - ECDensities(Field{Kind: FieldZ}, u-h)[d]) / (2 * h)
			if e := rel(math.Sqrt(lambda/(2*math.Pi))*der, z[d+1]); e > 1e-8 {
				t.Errorf("derivative relation d=%d u=%g: rel %.2g", d, u, e)
			}
		}
	}
	for _, v := range []float64{20, 100} {
		for _, u := range []float64{2, 3, 4.5} {
			f := ECDensities(Field{Kind: FieldF, DF1: 1, DF2: v}, u*u)
			tt := ECDensities(Field{Kind: FieldT, DF2: v}, u)
			for d := range f {
				if e := rel(f[d], 2*tt[d]); e > 1e-12 {
					t.Errorf("F(1,%g) at %g vs 2·t: ρ%d rel %.2g", v, u*u, d, e)
				}
			}
		}
	}
}

func TestReselsReference(t *testing.T) {
	r := loadEC(t)
	cases := []struct {
		key  string
		dims [3]int
		fwhm [3]float64
		in   func(i, j, k int) bool
	}{
		// 10×12×8 box, FWHM (2, 3, 4): the continuous box's intrinsic volumes.
		{"box_10x12x8_fwhm_2_3_4", [3]int{10, 12, 8}, [3]float64{2, 3, 4}, func(i, j, k int) bool { return true }},
		// Ball of radius 8 on a 19³ grid centred at 9 (EC 1); shell 3 < r <= 8 (EC 2).
		{"ball_radius8_fwhm3", [3]int{19, 19, 19}, [3]float64{3, 3, 3}, func(i, j, k int) bool {
			x, y, z := i-9, j-9, k-9
			return x*x+y*y+z*z <= 64
		}},
		{"shell_radius3to8_fwhm3", [3]int{19, 19, 19}, [3]float64{3, 3, 3}, func(i, j, k int) bool {
			x, y, z := i-9, j-9, k-9
			d := x*x + y*y + z*z
			return d <= 64 && d > 9
		}},
	}
	for _, c := range cases {
		var ref reselCase
		if err := json.Unmarshal(r.Resels[c.key], &ref); err != nil {
			t.Fatal(err)
		}
		mask := make([]bool, c.dims[0]*c.dims[1]*c.dims[2])
		for k := 0; k < c.dims[2]; k++ {
			for j := 0; j < c.dims[1]; j++ {
				for i := 0; i < c.dims[0]; i++ {
					mask[i+c.dims[0]*(j+c.dims[1]*k)] = c.in(i, j, k)
				}
			}
		}
		lc := CountLattice(mask, c.dims)
		got := map[string]int{"P": lc.P, "Ex": lc.Ex, "Ey": lc.Ey, "Ez": lc.Ez, "Fxy": lc.Fxy, "Fxz": lc.Fxz, "Fyz": lc.Fyz, "C": lc.C}
		for k, v := range ref.Counts {
			if got[k] != v {
				t.Errorf("%s: %s = %d, reference %d", c.key, k, got[k], v)
			}
		}
		rs := CountResels(mask, c.dims, c.fwhm)
		for d := range rs {
			if math.Abs(rs[d]-ref.R[d]) > 1e-12*math.Max(1, math.Abs(ref.R[d])) {
				t.Errorf("%s: R%d = %.17g, reference %.17g", c.key, d, rs[d], ref.R[d])
			}
		}
	}
	// A single slice (nz = 1) has no z edges: its FWHM in z does not matter, even if unknown.
	mask := make([]bool, 5*4)
	for i := range mask {
		mask[i] = true
	}
	rs := CountResels(mask, [3]int{5, 4, 1}, [3]float64{2, 2, math.NaN()})
	// Continuous rectangle of sides 4/2 and 3/2: (1, 2 + 1.5, 2·1.5, 0).
	if rs != (Resels{1, 3.5, 3, 0}) {
		t.Errorf("2D resels %v", rs)
	}
}

func TestVoxelThresholdsReference(t *testing.T) {
	r := loadEC(t)
	z, t20, t100 := Field{Kind: FieldZ}, Field{Kind: FieldT, DF2: 20}, Field{Kind: FieldT, DF2: 100}
	mask := make([]bool, 40*40*30)
	for i := range mask {
		mask[i] = true
	}
	lc := CountLattice(mask, [3]int{40, 40, 30})
	if lc.P != r.Voxel.NVoxels {
		t.Fatalf("box has %d voxels, reference %d", lc.P, r.Voxel.NVoxels)
	}
	for _, row := range r.Voxel.Rows {
		R := lc.Resels([3]float64{row.FWHM, row.FWHM, row.FWHM})
		for d := range R {
			if rel(R[d], row.R[d]) > 1e-12 {
				t.Errorf("FWHM %g: R%d = %g, reference %g", row.FWHM, d, R[d], row.R[d])
			}
		}
		for _, c := range []struct {
			name      string
			f         Field
			rft, bonf float64
		}{{"Z", z, row.ZRFT, row.ZBonf}, {"t20", t20, row.T20RFT, row.T20Bonf}, {"t100", t100, row.T100RFT, row.T100Bonf}} {
			u := RFTThreshold(R, c.f, r.Voxel.Alpha)
			if e := rel(u, c.rft); e > 1e-10 {
				t.Errorf("FWHM %g %s RFT threshold %.15g, reference %.15g (rel %.2g)", row.FWHM, c.name, u, c.rft, e)
			}
			ub := BonferroniThreshold(c.f, lc.P, r.Voxel.Alpha)
			if e := rel(ub, c.bonf); e > 1e-10 {
				t.Errorf("FWHM %g %s Bonferroni %.15g, reference %.15g", row.FWHM, c.name, ub, c.bonf)
			}
			v, err := VoxelThreshold(R, c.f, lc.P, r.Voxel.Alpha)
			if err != nil {
				t.Fatal(err)
			}
			// methods f.5: the lower of the two is used, and the result says which.
			if v.Threshold != math.Min(u, ub) || v.UsedBonferroni != (ub < u) {
				t.Errorf("FWHM %g %s: combined %+v", row.FWHM, c.name, v)
			}
			if (v.Warning() != "") != v.UsedBonferroni {
				t.Errorf("warning %q with UsedBonferroni %v", v.Warning(), v.UsedBonferroni)
			}
			// At the threshold, the corrected p is alpha (E[χ] = α there) and at Bonferroni's,
			// the Bonferroni p is alpha.
			if p := PeakP(R, c.f, u); rel(p, r.Voxel.Alpha) > 1e-9 {
				t.Errorf("FWHM %g %s PeakP at threshold = %.15g", row.FWHM, c.name, p)
			}
			if p := BonferroniP(c.f, lc.P, ub); rel(p, r.Voxel.Alpha) > 1e-9 {
				t.Errorf("FWHM %g %s BonferroniP at threshold = %.15g", row.FWHM, c.name, p)
			}
			p, usedB := VoxelP(R, c.f, lc.P, v.Threshold)
			if rel(p, r.Voxel.Alpha) > 1e-9 || usedB != v.UsedBonferroni {
				t.Errorf("FWHM %g %s VoxelP at the combined threshold = %.15g (Bonferroni %v)", row.FWHM, c.name, p, usedB)
			}
		}
	}
}

// PeakP is a p-value: monotone non-increasing in u, within [0, 1], 1 at low u where the
// expected EC is non-monotone or negative (Gaussian ρ3 < 0 for u < 1).
func TestPeakPShape(t *testing.T) {
	R := Resels{1, 26.75, 236.4375, 689.203125} // 40×40×30 box at FWHM 4 (ec_rft.json)
	for _, f := range []Field{{Kind: FieldZ}, {Kind: FieldT, DF2: 12}, {Kind: FieldF, DF1: 3, DF2: 40}} {
		var us []float64
		for u := -3.0; u <= 30; u += 0.05 {
			us = append(us, u)
		}
		prev := 2.0
		for i, p := range PeakPs(R, f, us) {
			if !(p >= 0 && p <= 1) || p > prev {
				t.Fatalf("field %+v: PeakP(%g) = %g after %g", f, us[i], p, prev)
			}
			if q := PeakP(R, f, us[i]); i%200 == 0 && q != p {
				t.Fatalf("PeakP(%g) = %g, PeakPs gives %g", us[i], q, p)
			}
			prev = p
		}
		if p := PeakP(R, f, 0.5); p != 1 {
			t.Errorf("PeakP at 0.5 = %g, want 1", p)
		}
	}
	// A search region with a negative Euler characteristic still gets a sane threshold.
	if u := RFTThreshold(Resels{-3, 10, 50, 100}, Field{Kind: FieldZ}, 0.05); !(u > 3 && u < 6) {
		t.Errorf("threshold with R0 = -3: %g", u)
	}
	if !math.IsNaN(RFTThreshold(R, Field{Kind: FieldZ}, 1.5)) || !math.IsNaN(RFTThreshold(Resels{math.NaN()}, Field{Kind: FieldZ}, 0.05)) {
		t.Error("invalid input must give NaN")
	}
	if _, err := VoxelThreshold(R, Field{Kind: FieldT, DF2: -1}, 100, 0.05); err == nil {
		t.Error("negative df accepted")
	}
	if _, err := VoxelThreshold(R, Field{Kind: FieldZ}, 0, 0.05); err == nil {
		t.Error("empty search region accepted")
	}
}

// F-field threshold: on the F scale, with E[χ] = α there, above the Bonferroni-free single
// voxel quantile.
func TestFThreshold(t *testing.T) {
	R := Resels{1, 26.75, 236.4375, 689.203125}
	f := Field{Kind: FieldF, DF1: 2, DF2: 50}
	u := RFTThreshold(R, f, 0.05)
	if rel(ExpectedEC(R, f, u), 0.05) > 1e-9 || u < f.Quantile(math.Log(0.05)) {
		t.Errorf("F threshold %g: E[χ] = %g", u, ExpectedEC(R, f, u))
	}
	// F(1, ν) at t² ranks like a two-sided t: the F threshold at α is the square of the t
	// threshold at α/2 (ρ_F = 2ρ_t, methods f.4).
	ft := RFTThreshold(R, Field{Kind: FieldF, DF1: 1, DF2: 30}, 0.05)
	tt := RFTThreshold(R, Field{Kind: FieldT, DF2: 30}, 0.025)
	if rel(ft, tt*tt) > 1e-10 {
		t.Errorf("F(1,30) threshold %.15g, t(30) at α/2 squared %.15g", ft, tt*tt)
	}
}

// For a t field with 3 df the expected EC does not fall to 0 (ρ3 tends to a constant), so
// there is no RFT threshold; Bonferroni's is used and peaks get the Bonferroni p.
func TestLowDFFallsBackToBonferroni(t *testing.T) {
	R := Resels{1, 26.75, 236.4375, 689.203125}
	f := Field{Kind: FieldT, DF2: 3}
	v, err := VoxelThreshold(R, f, 48000, 0.05)
	if err != nil {
		t.Fatal(err)
	}
	if !math.IsInf(v.RFT, 1) || !v.UsedBonferroni || v.Threshold != v.Bonferroni {
		t.Errorf("t(3): %+v", v)
	}
	if p, usedB := VoxelP(R, f, 48000, v.Bonferroni); !usedB || rel(p, 0.05) > 1e-9 {
		t.Errorf("t(3) VoxelP at the Bonferroni threshold: %g %v", p, usedB)
	}
}
