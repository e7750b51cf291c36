package group

import (
	"context"
	"encoding/json"
	"math"
	"math/rand/v2"
	"os"
	"slices"
	"testing"

	"gonum.org/v1/gonum/mat"
)

type permFixture struct {
	OneSample struct {
		N        int         `json:"n_subjects"`
		Y        [][]float64 `json:"Y"`
		T        []float64   `json:"t"`
		Flips    int         `json:"n_sign_flips"`
		PUnc     []float64   `json:"p_uncorrected"`
		PUncSci  []float64   `json:"p_uncorrected_scipy"`
		MaxT     []float64   `json:"max_t_sorted_desc"`
		PFWE     []float64   `json:"p_fwe"`
		Alpha    float64     `json:"alpha"`
		K        int         `json:"k_floor_alpha_N"`
		Critical float64     `json:"critical_value"`
	} `json:"one_sample_sign_flip"`
	TwoSample struct {
		N1       int         `json:"n1"`
		N2x      int         `json:"n2"`
		Y        [][]float64 `json:"Y_group1_first"`
		T        []float64   `json:"t_pooled"`
		Relabels int         `json:"n_relabellings"`
		PUnc     []float64   `json:"p_uncorrected"`
		PUncSci  []float64   `json:"p_uncorrected_scipy"`
		MaxT     []float64   `json:"max_t_sorted_desc"`
		PFWE     []float64   `json:"p_fwe"`
		Alpha    float64     `json:"alpha"`
		K        int         `json:"k_floor_alpha_N"`
		Critical float64     `json:"critical_value"`
	} `json:"two_sample_label_permutation"`
}

func loadFixture(t *testing.T) *permFixture {
	t.Helper()
	b, err := os.ReadFile("../../testdata/group/permutation.json")
	if err != nil {
		t.Fatal(err)
	}
	var f permFixture
	if err := json.Unmarshal(b, &f); err != nil {
		t.Fatal(err)
	}
	return &f
}

// flat turns rows of subjects into the N×V layout, with the voxels on a 1-row grid.
func flat(y [][]float64) ([]float64, Space) {
	n, v := len(y), len(y[0])
	out := make([]float64, 0, n*v)
	for _, row := range y {
		out = append(out, row...)
	}
	sp := Space{Dims: [3]int{v, 1, 1}}
	for k := range v {
		sp.Voxels = append(sp.Voxels, int32(k))
	}
	return out, sp
}

func designOf(rows [][]float64) *mat.Dense {
	x := mat.NewDense(len(rows), len(rows[0]), nil)
	for i, r := range rows {
		x.SetRow(i, r)
	}
	return x
}

// checkExhaustive runs a model on the fixture data and compares every quantity the fixture
// holds (permutation.json; numpy enumeration, p cross-checked with scipy permutation_test).
func checkExhaustive(t *testing.T, m *Model, y [][]float64, wantN int, tw, pUnc, maxT, pFWE []float64, alpha, crit float64, k int) {
	t.Helper()
	data, sp := flat(y)
	pl, err := m.Plan(5000, 1)
	if err != nil {
		t.Fatal(err)
	}
	if !pl.Exhaustive || pl.N != wantN {
		t.Fatalf("plan: exhaustive %v, N %d; want all %d", pl.Exhaustive, pl.N, wantN)
	}
	prob := m.Prepare(data, sp)
	obs := prob.Observe(&pl, Options{})
	for v, w := range tw {
		// t against the fixture's t (= scipy.stats.ttest_1samp / ttest_ind statistic).
		if math.Abs(obs.Stat[v]-w) > 1e-10*math.Max(1, math.Abs(w)) {
			t.Errorf("voxel %d: t %.15g, want %.15g", v, obs.Stat[v], w)
		}
	}
	null, err := prob.Run(context.Background(), &pl, 0, pl.N, Options{Stats: MaxStat, Exceed: true, Observed: obs, Workers: 2})
	if err != nil {
		t.Fatal(err)
	}
	for v, w := range pUnc {
		// exact: count/N with the identity among the N (fixture; scipy permutation_test).
		if got := float64(null.Exceed[v]) / float64(pl.N); got != w {
			t.Errorf("voxel %d: uncorrected p %g, want %g", v, got, w)
		}
	}
	got := slices.Clone(null.Stat)
	slices.Sort(got)
	slices.Reverse(got)
	for i, w := range maxT {
		if math.Abs(got[i]-w) > 1e-10*math.Max(1, math.Abs(w)) {
			t.Fatalf("sorted max t[%d] = %.15g, want %.15g", i, got[i], w)
		}
	}
	d := NewDistribution(null.Stat)
	for v, w := range pFWE {
		if p := d.P(obs.Stat[v]); p != w {
			t.Errorf("voxel %d: FWE p %g, want %g", v, p, w)
		}
	}
	if d.K(alpha) != k {
		t.Errorf("k = %d, want %d", d.K(alpha), k)
	}
	c, ok := d.Critical(alpha)
	if !ok || math.Abs(c-crit) > 1e-10*crit {
		t.Errorf("critical value %v (%v), want %v", c, ok, crit)
	}
}

func TestOneSampleExhaustiveFixture(t *testing.T) {
	f := loadFixture(t).OneSample
	x := designOf(slices.Repeat([][]float64{{1}}, f.N))
	m, err := NewModel(x, [][]float64{{1}})
	if err != nil {
		t.Fatal(err)
	}
	if m.Scheme != SignFlips {
		t.Fatalf("scheme %v, want sign flips", m.Scheme)
	}
	checkExhaustive(t, m, f.Y, f.Flips, f.T, f.PUnc, f.MaxT, f.PFWE, f.Alpha, f.Critical, f.K)
	// The fixture's own cross-check: its p equals scipy's permutation_test p.
	for v := range f.PUnc {
		if math.Abs(f.PUnc[v]-f.PUncSci[v]) > 1e-12 {
			t.Errorf("fixture p %g vs scipy %g", f.PUnc[v], f.PUncSci[v])
		}
	}
}

func TestTwoSampleExhaustiveFixture(t *testing.T) {
	f := loadFixture(t).TwoSample
	n1, n2 := f.N1, f.N2x
	// Two parametrisations of the same model: group indicators, and intercept + indicator.
	var ind, icpt [][]float64
	for i := range n1 + n2 {
		g := 0.0
		if i < n1 {
			g = 1
		}
		ind = append(ind, []float64{g, 1 - g})
		icpt = append(icpt, []float64{1, g})
	}
	for name, c := range map[string]struct {
		x [][]float64
		w []float64
	}{"indicators": {ind, []float64{1, -1}}, "intercept": {icpt, []float64{0, 1}}} {
		t.Run(name, func(t *testing.T) {
			m, err := NewModel(designOf(c.x), [][]float64{c.w})
			if err != nil {
				t.Fatal(err)
			}
			if m.Scheme != Permutations {
				t.Fatalf("scheme %v, want permutations", m.Scheme)
			}
			checkExhaustive(t, m, f.Y, f.Relabels, f.T, f.PUnc, f.MaxT, f.PFWE, f.Alpha, f.Critical, f.K)
		})
	}
}

// TestFreedmanLaneObserved: identity: the observed statistic of Freedman–Lane is the
// full-model OLS t (and F), computed here directly with gonum's least squares.
func TestFreedmanLaneObserved(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	n, v := 15, 7
	x := mat.NewDense(n, 4, nil)
	for i := range n {
		g := float64(i % 2)
		x.SetRow(i, []float64{1, g, rng.NormFloat64(), rng.NormFloat64() + 0.3*g})
	}
	y := make([][]float64, n)
	for i := range y {
		y[i] = make([]float64, v)
		for k := range v {
			y[i][k] = rng.NormFloat64() + 0.5*x.At(i, 2) + float64(k)*0.2*x.At(i, 1)
		}
	}
	data, sp := flat(y)
	contrasts := [][][]float64{{{0, 1, 0, 0}}, {{0, 0, 1, -1}}, {{1, 0, 0, 0}}, {{0, 1, 0, 0}, {0, 0, 1, 0}}}
	for ci, c := range contrasts {
		m, err := NewModel(x, c)
		if err != nil {
			t.Fatal(err)
		}
		pl, _ := m.Plan(100, 9)
		obs := m.Prepare(data, sp).Observe(&pl, Options{})
		var xtx, xtxi mat.Dense
		xtx.Mul(x.T(), x)
		if err := xtxi.Inverse(&xtx); err != nil {
			t.Fatal(err)
		}
		for k := range v {
			yk := mat.NewVecDense(n, nil)
			for i := range n {
				yk.SetVec(i, y[i][k])
			}
			var beta mat.VecDense
			if err := beta.SolveVec(x, yk); err != nil {
				t.Fatal(err)
			}
			var fit mat.VecDense
			fit.MulVec(x, &beta)
			rss := 0.0
			for i := range n {
				r := yk.AtVec(i) - fit.AtVec(i)
				rss += r * r
			}
			s2 := rss / float64(n-4)
			cm := mat.NewDense(len(c), 4, nil)
			for i, row := range c {
				cm.SetRow(i, row)
			}
			var cb mat.VecDense
			cb.MulVec(cm, &beta)
			var want float64
			if len(c) == 1 {
				var tmp mat.VecDense
				cv := mat.NewVecDense(4, c[0])
				tmp.MulVec(&xtxi, cv)
				want = cb.AtVec(0) / math.Sqrt(s2*mat.Dot(cv, &tmp))
				if e := obs.Effect[0][k]; math.Abs(e-cb.AtVec(0)) > 1e-10*math.Max(1, math.Abs(e)) {
					t.Errorf("contrast %d voxel %d: effect %g, want %g", ci, k, e, cb.AtVec(0))
				}
			} else {
				var m1, m2, w mat.Dense
				m1.Mul(cm, &xtxi)
				m2.Mul(&m1, cm.T())
				if err := w.Inverse(&m2); err != nil {
					t.Fatal(err)
				}
				var wc mat.VecDense
				wc.MulVec(&w, &cb)
				want = mat.Dot(&cb, &wc) / float64(len(c)) / s2
			}
			if got := obs.Stat[k]; math.Abs(got-want) > 1e-9*math.Max(1, math.Abs(want)) {
				t.Errorf("contrast %d voxel %d: stat %.12g, want OLS %.12g", ci, k, got, want)
			}
		}
	}
}

func TestSchemeChoice(t *testing.T) {
	// winnow's rule (package doc): sign flips unless the constant lies in the reduced model.
	n := 10
	rows := make([][]float64, n)
	for i := range rows {
		rows[i] = []float64{1, float64(i%2) - 0.5, float64(i*i%7) - 3}
	}
	x := designOf(rows)
	cases := []struct {
		c    []float64
		want Scheme
	}{
		{[]float64{1, 0, 0}, SignFlips},    // the mean, covariates as nuisance
		{[]float64{0, 1, 0}, Permutations}, // a group difference
		{[]float64{0, 0, 1}, Permutations}, // a covariate's slope
	}
	for _, tc := range cases {
		m, err := NewModel(x, [][]float64{tc.c})
		if err != nil {
			t.Fatal(err)
		}
		if m.Scheme != tc.want {
			t.Errorf("contrast %v: %v, want %v", tc.c, m.Scheme, tc.want)
		}
	}
}

func TestModelErrors(t *testing.T) {
	rows := [][]float64{{1, 1}, {1, 1}, {1, 1}, {1, 1}}
	if _, err := NewModel(designOf(rows), [][]float64{{1, 0}}); err == nil {
		t.Error("rank-deficient design accepted")
	}
	if _, err := NewModel(designOf([][]float64{{1}}), [][]float64{{1}}); err == nil {
		t.Error("one subject accepted for a one-sample test")
	}
}

func TestMultisetRanking(t *testing.T) {
	counts := []int{2, 3, 1}
	total := int(multinomial(counts)) // 6!/(2!3!1!) = 60
	if total != 60 {
		t.Fatalf("multinomial %d, want 60", total)
	}
	seq := make([]int, 6)
	var prev []int
	seen := map[string]bool{}
	for j := range total {
		unrankMultiset(uint64(j), counts, seq)
		if prev != nil && slices.Compare(prev, seq) >= 0 {
			t.Fatalf("sequence %d %v not after %v (lexicographic order)", j, seq, prev)
		}
		if r := rankMultiset(seq, counts); r != uint64(j) {
			t.Fatalf("rank(unrank(%d)) = %d", j, r)
		}
		seen[string(rune(j))] = true
		prev = slices.Clone(seq)
	}
	// itertools.combinations order for two groups: the first relabellings of 5 + 6 put
	// group 1 on {0,1,2,3,4}, {0,1,2,3,5}, {0,1,2,3,6} (Python documentation of combinations).
	c2 := []int{5, 6}
	want := [][]int{{0, 1, 2, 3, 4}, {0, 1, 2, 3, 5}, {0, 1, 2, 3, 6}}
	s := make([]int, 11)
	for j, w := range want {
		unrankMultiset(uint64(j), c2, s)
		var g1 []int
		for i, c := range s {
			if c == 0 {
				g1 = append(g1, i)
			}
		}
		if !slices.Equal(g1, w) {
			t.Errorf("relabelling %d puts group 1 on %v, want %v", j, g1, w)
		}
	}
}

func TestRandomPlan(t *testing.T) {
	rows := slices.Repeat([][]float64{{1}}, 20)
	m, _ := NewModel(designOf(rows), [][]float64{{1}})
	pl, err := m.Plan(500, 7)
	if err != nil {
		t.Fatal(err)
	}
	if pl.Exhaustive || pl.N != 500 {
		t.Fatalf("plan %+v", pl)
	}
	a, b := pl.NewRelabelling(), pl.NewRelabelling()
	pl.At(0, a)
	for _, s := range a.Signs {
		if s != 1 {
			t.Fatal("relabelling 0 is not the identity")
		}
	}
	// Relabelling j depends only on (seed, j); no draw is the identity.
	for j := 1; j < pl.N; j++ {
		pl.At(j, a)
		pl.At(j, b)
		if !slices.Equal(a.Signs, b.Signs) {
			t.Fatal("relabelling not reproducible")
		}
		if !slices.Contains(a.Signs, -1) {
			t.Fatalf("draw %d is the identity", j)
		}
	}
	if _, err := m.Plan(0, 1); err == nil {
		t.Error("0 permutations accepted")
	}
}

// TestInterleavedGroupsExhaustive: with the groups interleaved (the identity is not the first
// relabelling in lexicographic order) the exhaustive null equals a direct enumeration of all
// C(8, 4) = 70 splits with the pooled-variance two-sample t (textbook formula, common practice).
func TestInterleavedGroupsExhaustive(t *testing.T) {
	rng := rand.New(rand.NewPCG(8, 8))
	n, v := 8, 5
	y := make([][]float64, n)
	rows := make([][]float64, n)
	for i := range n {
		g := float64((i + 1) % 2) // subjects 0, 2, 4, 6 in group 1
		rows[i] = []float64{g, 1 - g}
		y[i] = make([]float64, v)
		for k := range v {
			y[i][k] = rng.NormFloat64() + g*float64(k)*0.4
		}
	}
	m, err := NewModel(designOf(rows), [][]float64{{1, -1}})
	if err != nil {
		t.Fatal(err)
	}
	pl, _ := m.Plan(1000, 1)
	if !pl.Exhaustive || pl.N != 70 {
		t.Fatalf("plan %+v", pl)
	}
	data, sp := flat(y)
	prob := m.Prepare(data, sp)
	obs := prob.Observe(&pl, Options{})
	null, _ := prob.Run(context.Background(), &pl, 0, pl.N, Options{Stats: MaxStat})
	if id := pl.IdentityIndex(); null.Stat[id] != obs.Max.Stat {
		t.Errorf("identity (relabelling %d) maximum %g, observed %g", id, null.Stat[id], obs.Max.Stat)
	}
	tstat := func(in []bool, k int) float64 {
		var s1, s2, q1, q2, n1, n2 float64
		for i := range n {
			if in[i] {
				s1 += y[i][k]
				q1 += y[i][k] * y[i][k]
				n1++
			} else {
				s2 += y[i][k]
				q2 += y[i][k] * y[i][k]
				n2++
			}
		}
		m1, m2 := s1/n1, s2/n2
		ssw := q1 - n1*m1*m1 + q2 - n2*m2*m2
		return (m1 - m2) / math.Sqrt(ssw/(n1+n2-2)*(1/n1+1/n2))
	}
	var want []float64
	for mask := range 1 << n {
		if bitsOn(mask) != 4 {
			continue
		}
		in := make([]bool, n)
		for i := range n {
			in[i] = mask>>i&1 == 1
		}
		mx := math.Inf(-1)
		for k := range v {
			mx = math.Max(mx, tstat(in, k))
		}
		want = append(want, mx)
	}
	got := slices.Clone(null.Stat)
	slices.Sort(got)
	slices.Sort(want)
	for i := range want {
		if math.Abs(got[i]-want[i]) > 1e-9*math.Max(1, math.Abs(want[i])) {
			t.Fatalf("sorted null[%d] = %g, direct enumeration %g", i, got[i], want[i])
		}
	}
}

func bitsOn(x int) int {
	c := 0
	for ; x != 0; x &= x - 1 {
		c++
	}
	return c
}
