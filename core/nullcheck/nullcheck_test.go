package nullcheck

import (
	"math"
	"math/rand/v2"
	"slices"
	"sort"
	"strings"
	"testing"

	"gonum.org/v1/gonum/mat"

	"winnow/core/glm"

	"winnow/core/design"
)

// twoConditions is an event-related design of two conditions, 12 events each of 2 s,
// at jittered onsets 4 to 8 s apart, over a run of n volumes of 2 s.
func twoConditions(seed uint64, n int) []design.Condition {
	rng := rand.New(rand.NewPCG(seed, 1))
	conds := []design.Condition{{Name: "faces"}, {Name: "houses"}}
	t := 10.0
	for e := range 24 {
		c := &conds[e%2]
		c.Onsets = append(c.Onsets, t)
		c.Durations = append(c.Durations, 2)
		t += 6 + 4*rng.Float64()
		if t > float64(n)*2-30 {
			break
		}
	}
	return conds
}

func buildReal(t testing.TB, conds []design.Condition, n int, derivs bool) (*design.Design, Options) {
	t.Helper()
	opt := Options{Volumes: n, TR: 2, HRFDerivs: derivs}
	d, err := design.Build(conds, design.Options{Volumes: n, TR: 2, HRFDerivs: derivs, HighpassSec: 128})
	if err != nil {
		t.Fatal(err)
	}
	return d, opt
}

type ev struct {
	cond    int
	on, dur float64
}

func events(conds []design.Condition) []ev {
	var out []ev
	for ci, c := range conds {
		for i, o := range c.Onsets {
			out = append(out, ev{ci, o, c.Durations[i]})
		}
	}
	sort.Slice(out, func(i, j int) bool { return out[i].on < out[j].on })
	return out
}

// TestDrawKeepsCountsDurationsSpacing: each chance design keeps every condition's event
// count and multiset of durations, lies within the span of the real events and keeps at
// least their minimum spacing (the definition of the chance designs, package doc).
func TestDrawKeepsCountsDurationsSpacing(t *testing.T) {
	const n = 120
	conds := twoConditions(3, n)
	// Mixed durations: some 4 s events in the second condition.
	conds[1].Durations[0], conds[1].Durations[2] = 4, 4
	real, opt := buildReal(t, conds, n, false)
	opt.Designs = 12
	d, err := Draw(conds, real, opt)
	if err != nil {
		t.Fatal(err)
	}
	re := events(conds)
	gap := math.Inf(1)
	for i := 1; i < len(re); i++ {
		gap = math.Min(gap, re[i].on-re[i-1].on-re[i-1].dur)
	}
	if d.MinSpacing != gap || d.Span[0] != re[0].on || d.Placement != PlacementSpaced {
		t.Fatalf("spacing %g span %v placement %v, want %g from %g, spaced", d.MinSpacing, d.Span, d.Placement, gap, re[0].on)
	}
	if len(d.X) != 12 || len(d.Columns) != 2 || d.Columns[0] != "faces" || d.Columns[1] != "houses" {
		t.Fatalf("designs %d, columns %v", len(d.X), d.Columns)
	}
	same := 0
	for k, nc := range d.Events {
		for ci, c := range nc {
			if c.Name != conds[ci].Name || len(c.Onsets) != len(conds[ci].Onsets) {
				t.Fatalf("design %d condition %d: %q with %d events, want %q with %d", k, ci, c.Name, len(c.Onsets), conds[ci].Name, len(conds[ci].Onsets))
			}
			a, b := slices.Clone(c.Durations), slices.Clone(conds[ci].Durations)
			slices.Sort(a)
			slices.Sort(b)
			if !slices.Equal(a, b) {
				t.Fatalf("design %d condition %q: durations %v, want %v", k, c.Name, a, b)
			}
		}
		ne := events(nc)
		for i, e := range ne {
			if e.on < d.Span[0]-1e-9 || e.on+e.dur > d.Span[1]+1e-9 {
				t.Fatalf("design %d: event [%g, %g] outside the span %v", k, e.on, e.on+e.dur, d.Span)
			}
			if i > 0 && e.on-(ne[i-1].on+ne[i-1].dur) < gap-1e-9 {
				t.Fatalf("design %d: gap %g below the minimum %g", k, e.on-(ne[i-1].on+ne[i-1].dur), gap)
			}
		}
		if slices.Equal(nc[0].Onsets, conds[0].Onsets) {
			same++
		}
	}
	if same > 0 {
		t.Errorf("%d chance designs repeat the real onsets", same)
	}
	// Seeded determinism: the same seed gives the same designs, another seed others.
	d2, err := Draw(conds, real, opt)
	if err != nil {
		t.Fatal(err)
	}
	for k := range d.Events {
		if !slices.Equal(d.Events[k][0].Onsets, d2.Events[k][0].Onsets) || !mat.Equal(d.X[k], d2.X[k]) {
			t.Fatalf("design %d differs between two draws with the same seed", k)
		}
	}
	opt.Seed = 99
	d3, err := Draw(conds, real, opt)
	if err != nil {
		t.Fatal(err)
	}
	if slices.Equal(d.Events[0][0].Onsets, d3.Events[0][0].Onsets) {
		t.Error("another seed gave the same first design")
	}
	// The real timing itself is exactly collinear with the real design: refused.
	if x, why := d.build(conds, design.Options{Volumes: n, TR: 2}, real.X); x != nil || why == "" {
		t.Error("the real timing itself was accepted as a chance design (it is collinear with the real design)")
	}
}

// TestDrawDerivsAndCollinear: with derivatives the null columns follow the real ones; a
// design whose events fill their span (so every chance layout sums to the real one) is
// refused with a clear message instead of looping.
func TestDrawDerivsAndCollinear(t *testing.T) {
	const n = 120
	conds := twoConditions(5, n)
	real, opt := buildReal(t, conds, n, true)
	opt.Designs = 3
	d, err := Draw(conds, real, opt)
	if err != nil {
		t.Fatal(err)
	}
	want := []string{"faces", "faces_deriv", "faces_disp", "houses", "houses_deriv", "houses_disp"}
	if !slices.Equal(d.Columns, want) {
		t.Fatalf("columns %v, want %v", d.Columns, want)
	}
	// Only the conditions the contrasts use are modelled; the layout still places all.
	opt.Conditions = []string{"houses"}
	d, err = Draw(conds, real, opt)
	if err != nil {
		t.Fatal(err)
	}
	if want := want[3:]; !slices.Equal(d.Columns, want) || !slices.Equal(d.Real, []int{3, 4, 5}) || len(d.Events[0][0].Onsets) != len(conds[0].Onsets) {
		t.Fatalf("columns %v (real %v), want %v", d.Columns, d.Real, want)
	}
	// Alternating blocks with no gap: A and B fill [0, 200) s.
	packed := []design.Condition{{Name: "a"}, {Name: "b"}}
	for i := range 10 {
		c := &packed[i%2]
		c.Onsets = append(c.Onsets, float64(20*i))
		c.Durations = append(c.Durations, 20)
	}
	real, opt = buildReal(t, packed, n, false)
	opt.Designs = 2
	d, err = Draw(packed, real, opt)
	if err != nil {
		t.Fatalf("packed design: %v", err)
	}
	if d.Reference != "b" || !slices.Equal(d.Columns, []string{"a"}) {
		t.Fatalf("packed design: reference %q, columns %v; want b, [a] (relabellings, see tiled_test.go)", d.Reference, d.Columns)
	}
	// One condition filling its span: every chance layout is the real one.
	single := []design.Condition{{Name: "a"}}
	for i := range 5 {
		single[0].Onsets = append(single[0].Onsets, float64(40*i))
		single[0].Durations = append(single[0].Durations, 40)
	}
	real, opt = buildReal(t, single, n, false)
	opt.Designs = 2
	_, err = Draw(single, real, opt)
	t.Log(err)
	if err == nil || !strings.Contains(err.Error(), "not collinear with the real design") {
		t.Fatalf("single packed condition: err %v, want the collinearity message", err)
	}
}

// TestContrastMapping: weights move to the null columns by name; a contrast over a
// non-condition column is refused naming it.
func TestContrastMapping(t *testing.T) {
	const n = 120
	conds := twoConditions(3, n)
	real, opt := buildReal(t, conds, n, false)
	opt.Designs = 1
	d, err := Draw(conds, real, opt)
	if err != nil {
		t.Fatal(err)
	}
	p := len(real.Columns)
	w := make([]float64, p)
	w[0], w[1] = 1, -1
	got, err := d.Contrast("diff", [][]float64{w}, real.Columns)
	if err != nil || !slices.Equal(got[0], []float64{1, -1}) {
		t.Fatalf("mapped %v, %v", got, err)
	}
	w2 := make([]float64, p)
	w2[p-1] = 1
	_, err = d.Contrast("mean", [][]float64{w2}, real.Columns)
	if err == nil || !strings.Contains(err.Error(), `"intercept"`) {
		t.Fatalf("intercept contrast: %v", err)
	}
}

// ar1Data makes per-voxel AR(1) series around a baseline of 1000 (sd 5 innovations) with a
// response to the first real condition in half of the voxels.
func ar1Data(rng *rand.Rand, x *mat.Dense, m int, rho []float64) [][]float64 {
	n, _ := x.Dims()
	y := make([][]float64, n)
	for t := range y {
		y[t] = make([]float64, m)
	}
	for v := range m {
		e := 0.0
		for t := range n {
			e = rho[v]*e + 5*rng.NormFloat64()
			if t == 0 {
				e /= math.Sqrt(1 - rho[v]*rho[v])
			}
			amp := 0.0
			if v%2 == 0 {
				amp = 8
			}
			y[t][v] = 1000 + float64(v) + amp*x.At(t, 0) + e
		}
	}
	return y
}

// explicitGLS fits [null | real] to one voxel's series by explicit Prais–Winsten whitening
// (methods d.2) in float64 and returns t for c and F for rows.
func explicitGLS(nx, x *mat.Dense, y []float64, rho float64, c []float64, rows [][]float64) (tval, fval float64) {
	n, q := nx.Dims()
	_, p := x.Dims()
	P := q + p
	z := mat.NewDense(n, P, nil)
	yy := mat.NewVecDense(n, nil)
	s := math.Sqrt(1 - rho*rho)
	for t := range n {
		for j := range P {
			v := 0.0
			var prev float64
			if j < q {
				v = nx.At(t, j)
				if t > 0 {
					prev = nx.At(t-1, j)
				}
			} else {
				v = x.At(t, j-q)
				if t > 0 {
					prev = x.At(t-1, j-q)
				}
			}
			if t == 0 {
				z.Set(t, j, s*v)
			} else {
				z.Set(t, j, v-rho*prev)
			}
		}
		if t == 0 {
			yy.SetVec(t, s*y[t])
		} else {
			yy.SetVec(t, y[t]-rho*y[t-1])
		}
	}
	var qr mat.QR
	qr.Factorize(z)
	var beta mat.VecDense
	if err := qr.SolveVecTo(&beta, false, yy); err != nil {
		panic(err)
	}
	var fitted mat.VecDense
	fitted.MulVec(z, &beta)
	fitted.SubVec(yy, &fitted)
	s2 := mat.Dot(&fitted, &fitted) / float64(n-P)
	var g mat.SymDense
	g.SymOuterK(1, z.T())
	var ginv mat.SymDense
	var ch mat.Cholesky
	ch.Factorize(&g)
	ch.InverseTo(&ginv)
	full := func(w []float64) *mat.VecDense {
		v := mat.NewVecDense(P, nil)
		for j, x := range w {
			v.SetVec(j, x)
		}
		return v
	}
	cv := full(c)
	tval = mat.Dot(cv, &beta) / math.Sqrt(s2*mat.Inner(cv, &ginv, cv))
	r := len(rows)
	cm := mat.NewDense(r, P, nil)
	for i, w := range rows {
		cm.SetRow(i, full(w).RawVector().Data)
	}
	var cb mat.VecDense
	cb.MulVec(cm, &beta)
	var m1, m2 mat.Dense
	m1.Mul(cm, &ginv)
	m2.Mul(&m1, cm.T())
	var sol mat.VecDense
	if err := sol.SolveVec(&m2, &cb); err != nil {
		panic(err)
	}
	fval = mat.Dot(&cb, &sol) / (float64(r) * s2)
	return tval, fval
}

// TestSolveMatchesExplicitGLS: t and F of every chance design from the streamed sums equal
// explicit Prais–Winsten GLS on the whole series (methods d.2, d.4 identities) up to the
// float32 rounding of the null sums, which the test measures; under OLS (nil ρ) likewise.
func TestSolveMatchesExplicitGLS(t *testing.T) {
	const n, m = 120, 300 // more voxels than one chunk
	conds := twoConditions(7, n)
	real, opt := buildReal(t, conds, n, false)
	opt.Designs = 10 // more than one group of designs
	d, err := Draw(conds, real, opt)
	if err != nil {
		t.Fatal(err)
	}
	rng := rand.New(rand.NewPCG(11, 12))
	rho := make([]float64, m)
	for v := range rho {
		rho[v] = -0.3 + 1.1*rng.Float64()
	}
	y := ar1Data(rng, real.X, m, rho)
	dims := [3]int{m + 3, 1, 1}
	voxels := make([]int32, m)
	for v := range voxels {
		voxels[v] = int32(v + 2)
	}
	acc := NewAccumulator(d, real.X, dims, voxels, true)
	ols := NewAccumulator(d, real.X, dims, voxels, false)
	// The same chance designs with the real design's sums read from package glm's
	// accumulator of the same pass.
	g := glm.NewAccumulator(real.X, dims, voxels)
	shared := NewSharedAccumulator(d, real.X, dims, voxels, true, g)
	sharedOLS := NewSharedAccumulator(d, real.X, dims, voxels, false, g)
	vol := make([]float32, dims[0])
	yr := make([][]float64, m) // the float32 volumes as the accumulators saw them
	for v := range yr {
		yr[v] = make([]float64, n)
	}
	for tt := range n {
		for v := range m {
			vol[v+2] = float32(y[tt][v])
			yr[v][tt] = float64(vol[v+2])
		}
		acc.AddVolume(vol)
		ols.AddVolume(vol)
		g.AddVolume(vol)
		shared.AddVolume(vol)
		sharedOLS.AddVolume(vol)
	}
	valid := make([]bool, m)
	for v := range valid {
		valid[v] = true
	}
	cons := [][][]float64{{{1, -1}}, {{1, 0}, {0, 1}}}
	cases := []struct {
		name string
		acc  *Accumulator
		rho  []float64
	}{{"AR(1) at the given ρ", acc, rho}, {"AR(1) sums, ρ = 0", acc, nil}, {"OLS sums", ols, nil},
		{"AR(1), real sums from glm", shared, rho}, {"OLS, real sums from glm", sharedOLS, nil}}
	for _, tc := range cases {
		r := tc.rho
		worst := 0.0
		seen := 0
		err = tc.acc.Solve(r, valid, cons, func(k int, st []Stat) error {
			seen++
			if st[0].F || !st[1].F || st[1].DF1 != 2 || st[0].DF2 != tc.acc.DF() || tc.acc.DF() != float64(n-2-len(real.Columns)) {
				t.Fatalf("stat kinds/df: %+v %+v, df %g", st[0].F, st[1], tc.acc.DF())
			}
			for v := range m {
				if v%30 != 0 && v != chunk-1 && v != chunk && v != m-1 {
					continue // a sample of voxels, both sides of a chunk boundary
				}
				rv := 0.0
				if r != nil {
					rv = r[v]
				}
				tw, fw := explicitGLS(d.X[k], real.X, yr[v], rv, []float64{1, -1}, [][]float64{{1, 0}, {0, 1}})
				et := math.Abs(st[0].Stat[v]-tw) / math.Max(1, math.Abs(tw))
				ef := math.Abs(st[1].Stat[v]-fw) / math.Max(1, math.Abs(fw))
				worst = math.Max(worst, math.Max(et, ef))
			}
			return nil
		})
		if err != nil || seen != 10 {
			t.Fatalf("solve: %v, %d designs", err, seen)
		}
		// float32 null sums with the first-sample offset: methods d.5 expects a relative
		// RSS error of about 5e−6; t and F must agree to 1e−4 (relative, or absolute below 1).
		t.Logf("%s: largest relative error of t and F against explicit float64 GLS: %.2g", tc.name, worst)
		if worst > 1e-4 {
			t.Errorf("%s: largest error %.3g, want ≤ 1e−4", tc.name, worst)
		}
	}
	// A voxel the real fit excluded, or without a ρ, gets NaN; its neighbours do not.
	valid[7] = false
	rho[9] = math.NaN()
	err = acc.Solve(rho, valid, cons, func(k int, st []Stat) error {
		for _, s := range st {
			if !math.IsNaN(s.Stat[7]) || !math.IsNaN(s.Stat[9]) || math.IsNaN(s.Stat[8]) {
				t.Fatalf("design %d: voxels 7, 8, 9 = %g, %g, %g; want NaN, a number, NaN", k, s.Stat[7], s.Stat[8], s.Stat[9])
			}
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
}

// TestClopperPearson against the closed forms that hold exactly (from the definition of
// the interval: the beta quantiles reduce to powers when one shape parameter is 1):
// x = 0: upper 1 − 0.025^(1/K); x = K: lower 0.025^(1/K); x = 1: lower 1 − 0.975^(1/K);
// x = K − 1: upper 0.975^(1/K). And x = 1, K = 40 ≈ [0.0006, 0.1316] (textbook value,
// from memory, as scipy.stats.binomtest(1, 40).proportion_ci(method='exact') gives).
func TestClopperPearson(t *testing.T) {
	for _, k := range []int{1, 2, 5, 20, 40, 100, 1000} {
		lo, hi := ClopperPearson(0, k)
		if lo != 0 || math.Abs(hi-(1-math.Pow(0.025, 1/float64(k)))) > 1e-10 {
			t.Errorf("x=0 K=%d: [%g, %g]", k, lo, hi)
		}
		lo, hi = ClopperPearson(k, k)
		if hi != 1 || math.Abs(lo-math.Pow(0.025, 1/float64(k))) > 1e-10 {
			t.Errorf("x=K=%d: [%g, %g]", k, lo, hi)
		}
		if k >= 2 {
			lo, _ = ClopperPearson(1, k)
			if math.Abs(lo-(1-math.Pow(0.975, 1/float64(k)))) > 1e-10 {
				t.Errorf("x=1 K=%d: lower %g", k, lo)
			}
			_, hi = ClopperPearson(k-1, k)
			if math.Abs(hi-math.Pow(0.975, 1/float64(k))) > 1e-10 {
				t.Errorf("x=K-1 K=%d: upper %g", k, hi)
			}
		}
	}
	lo, hi := ClopperPearson(1, 40)
	if math.Abs(lo-0.0006) > 0.00005 || math.Abs(hi-0.1316) > 0.00005 {
		t.Errorf("x=1 K=40: [%.5f, %.5f], want about [0.0006, 0.1316]", lo, hi)
	}
	// Symmetry of the exact interval: (x, K) ↔ (K − x, K) mirror each other (identity).
	for x := 0; x <= 17; x++ {
		a, b := ClopperPearson(x, 17)
		c, d := ClopperPearson(17-x, 17)
		if math.Abs(a-(1-d)) > 1e-12 || math.Abs(b-(1-c)) > 1e-12 {
			t.Errorf("x=%d K=17: [%g, %g] vs mirror [%g, %g]", x, a, b, c, d)
		}
	}
}

// TestSentenceAndWarning: the sentence of the example and the warning rule.
func TestSentenceAndWarning(t *testing.T) {
	nc := Record(1, 40)
	if nc.Designs != 40 || nc.WithFindings != 1 || nc.FWEEstimate != 0.025 || Warning(nc, 0.05) != "" {
		t.Fatalf("%+v %q", nc, Warning(nc, 0.05))
	}
	if want := "with these settings, 1 of 40 chance designs produced a finding: about 2.5 %, 95 % interval 0.1-13 %"; Sentence(nc) != want {
		t.Errorf("sentence %q, want %q", Sentence(nc), want)
	}
	if s := Sentence(Record(0, 40)); !strings.Contains(s, "0 of 40 chance designs produced no finding: about 0 %, 95 % interval 0-8.8 %") {
		t.Errorf("sentence %q", s)
	}
	// 6 of 40: lower bound 0.057 > 0.05 warns; 5 of 40 (lower 0.042) does not.
	if w := Warning(Record(6, 40), 0.05); !strings.Contains(w, "do not control the familywise error") {
		t.Errorf("no warning at 6 of 40: %q", w)
	}
	if w := Warning(Record(5, 40), 0.05); w != "" {
		t.Errorf("warning at 5 of 40: %q", w)
	}
}
