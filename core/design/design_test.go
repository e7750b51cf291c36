package design

import (
	"bytes"
	"errors"
	"fmt"
	"math"
	"strconv"
	"strings"
	"testing"
)

func ptr(f float64) *float64 { return &f }

func column(d *Design, name string) []float64 {
	for j, c := range d.Columns {
		if c.Name == name {
			r, _ := d.X.Dims()
			x := make([]float64, r)
			for i := range x {
				x[i] = d.X.At(i, j)
			}
			return x
		}
	}
	return nil
}

func fixtureCondition(f *hrfFixture) Condition {
	c := Condition{Name: "stim", Modulators: map[string][]float64{"amp": nil}}
	for _, e := range f.Example.Events {
		c.Onsets = append(c.Onsets, e[0])
		c.Durations = append(c.Durations, e[1])
		c.Modulators["amp"] = append(c.Modulators["amp"], e[2])
	}
	return c
}

// TestBuildFixture: the design's columns reproduce hrf.json:regressor_example
// at both frame offsets. The fixture weights its events by 1, 1, 2, −1; given
// those as a modulator, the modulated column holds Σ(aᵢ − ā)xᵢ/area, so
// fixture/area = modulated + ā·canonical with ā = 3/4 (linearity).
func TestBuildFixture(t *testing.T) {
	f := loadHRF(t)
	c := fixtureCondition(f)
	area := f.Normalised.AreaOne
	for _, o := range []struct {
		frac float64
		reg  regFixture
	}{{0, f.Example.Offset0}, {0.5, f.Example.Offset5}} {
		d, err := Build([]Condition{c}, Options{Volumes: f.Example.N, TR: f.Example.TR,
			SampleFraction: ptr(o.frac), Modulate: []string{"amp"}})
		if err != nil {
			t.Fatal(err)
		}
		if got := strings.Join(d.Names(), " "); got != "stim stim_x_amp intercept" {
			t.Fatalf("columns %q", got)
		}
		can, mod := column(d, "stim"), column(d, "stim_x_amp")
		for k, want := range o.reg.Canonical {
			if got := mod[k] + 0.75*can[k]; math.Abs(got-want/area) > tolClosedForm {
				t.Errorf("offset %g, scan %d: %.15g, want %.15g (hrf.json / area)", o.frac, k, got, want/area)
			}
		}
		if d := maxAbsDiff(d.Times, o.reg.Times); d != 0 {
			t.Errorf("offset %g: sample times differ from hrf.json by %g", o.frac, d)
		}
	}
	// nil SampleFraction means 0.5 (methods §a.5).
	d, err := Build([]Condition{c}, Options{Volumes: f.Example.N, TR: f.Example.TR})
	if err != nil {
		t.Fatal(err)
	}
	if maxAbsDiff(d.Times, f.Example.Offset5.Times) != 0 {
		t.Error("default sample times are not (k + 0.5)·TR")
	}
}

// TestBuildDerivs: with derivatives, the canonical column is unchanged, the
// temporal column is orthogonal to it and the dispersion column to both, and
// together they span the same space as the raw derivative regressors
// (Gram–Schmidt, methods §a.2).
func TestBuildDerivs(t *testing.T) {
	f := loadHRF(t)
	c := fixtureCondition(f)
	d, err := Build([]Condition{c}, Options{Volumes: 40, TR: 2, HRFDerivs: true, HighpassSec: 128})
	if err != nil {
		t.Fatal(err)
	}
	if got := strings.Join(d.Names(), " "); got != "stim stim_deriv stim_disp cosine_01 intercept" {
		t.Fatalf("columns %q", got)
	}
	wantKinds := []ColumnKind{ColumnCondition, ColumnTemporal, ColumnDispersion, ColumnDrift, ColumnIntercept}
	for i, k := range wantKinds {
		if d.Columns[i].Kind != k {
			t.Errorf("column %d kind %v, want %v", i, d.Columns[i].Kind, k)
		}
	}
	if d.Columns[1].Condition != "stim" || d.Columns[2].Condition != "stim" {
		t.Error("derivative columns do not name their condition")
	}
	area := HRFArea()
	ev := make([]Event, len(c.Onsets))
	for i := range ev {
		ev[i] = Event{Onset: c.Onsets[i], Duration: c.Durations[i], Amplitude: 1 / area}
	}
	raw := func(b Basis) []float64 { return regressor(d.Times, ev, b) }
	can, tmp, dis := column(d, "stim"), column(d, "stim_deriv"), column(d, "stim_disp")
	if e := maxAbsDiff(can, raw(BasisCanonical)); e > tolClosedForm {
		t.Errorf("canonical column differs from the exact regressor by %g", e)
	}
	norm := func(x []float64) float64 { return math.Sqrt(dot(x, x)) }
	for _, p := range []struct {
		name string
		a, b []float64
	}{{"temporal·canonical", tmp, can}, {"dispersion·canonical", dis, can}, {"dispersion·temporal", dis, tmp}} {
		if r := dot(p.a, p.b) / (norm(p.a) * norm(p.b)); math.Abs(r) > 1e-12 {
			t.Errorf("%s: cosine %g, want 0", p.name, r)
		}
	}
	// Residual of each raw derivative on the orthogonalised span.
	resid := func(x []float64, on ...[]float64) float64 {
		y := append([]float64(nil), x...)
		n0 := norm(y)
		orthogonalise(y, on...)
		return norm(y) / n0
	}
	if r := resid(raw(BasisTemporal), can, tmp); r > 1e-12 {
		t.Errorf("raw temporal regressor outside span{canonical, temporal}: relative residual %g", r)
	}
	if r := resid(raw(BasisDispersion), can, tmp, dis); r > 1e-12 {
		t.Errorf("raw dispersion regressor outside the span: relative residual %g", r)
	}
}

// TestSustainedBlock: after normalisation by the kernel's area a sustained
// block of amplitude 1 settles at exactly 1 once 32 s have passed (Hc(32)/area
// = 1, identity), is within 0.5 % of 1 from 25 s on and is 1.11 at 15 s
// (methods §a.6). Its maximum sits where h crosses zero, since the block's
// slope is h/area (identity), and is 1.144 (measured here; methods §a.6's
// "overshoots to 1.11 at 15 s" is the value at 15 s, not the maximum).
func TestSustainedBlock(t *testing.T) {
	f := loadHRF(t)
	const tr = 0.25
	d, err := Build([]Condition{{Name: "block", Onsets: []float64{0}, Durations: []float64{1000}}},
		Options{Volumes: 240, TR: tr, SampleFraction: ptr(0)})
	if err != nil {
		t.Fatal(err)
	}
	x := column(d, "block")
	best, bestT := 0.0, 0.0
	for k, tk := range d.Times {
		if x[k] > best {
			best, bestT = x[k], tk
		}
		if tk >= 25 && math.Abs(x[k]-1) > 0.005 {
			t.Errorf("t = %g s: %g, want within 0.5 %% of 1 (methods §a.6)", tk, x[k])
		}
		if tk >= HRFLength && math.Abs(x[k]-1) > tolClosedForm {
			t.Errorf("t = %g s: %.15g, want 1", tk, x[k])
		}
	}
	if v := x[int(15/tr)]; math.Abs(v-1.11) > 0.005 {
		t.Errorf("block at 15 s = %g, want 1.11 (methods §a.6, two decimals)", v)
	}
	if math.Abs(bestT-f.ZeroCross) > tr/2 {
		t.Errorf("block maximum at %g s, want the zero crossing %g s ± TR/2 (hrf.json)", bestT, f.ZeroCross)
	}
	if peak := HRFIntegral(f.ZeroCross) / HRFArea(); math.Abs(best-peak) > 1e-3 || math.Abs(peak-1.1443) > 1e-4 {
		t.Errorf("block maximum %g, continuous maximum %g, want about 1.1443", best, peak)
	}
	t.Logf("block maximum %.6f at %g s; %.6f at 15 s", best, bestT, x[int(15/tr)])
}

// TestImpulsePeak: a zero-duration event is an impulse of unit area, so its
// normalised peak is peak_value/area_0_32 = 0.2105 (hrf.json; methods §a.6).
func TestImpulsePeak(t *testing.T) {
	f := loadHRF(t)
	d, err := Build([]Condition{{Name: "flash", Onsets: []float64{21 - f.PeakTime}, Durations: []float64{0}}},
		Options{Volumes: 30, TR: 2})
	if err != nil {
		t.Fatal(err)
	}
	x := column(d, "flash")
	want := f.Normalised.PeakOne / f.Normalised.AreaOne
	if got := x[10]; math.Abs(got-want) > tolClosedForm || math.Abs(got-0.2105) > 5e-5 {
		t.Errorf("impulse peak %.15g at t = %g, want %.15g (≈ 0.2105)", got, d.Times[10], want)
	}
	if maxAbs(x) != x[10] {
		t.Errorf("impulse maximum %g is not at the sampled peak", maxAbs(x))
	}
}

func rampConfound(name string, n int, f func(i int) float64) Confound {
	v := make([]float64, n)
	for i := range v {
		v[i] = f(i)
	}
	return Confound{Name: name, Values: v}
}

// TestColumnOrder: conditions (each with derivatives then modulators),
// confounds, cosines, intercept; names and kinds as the package documents.
func TestColumnOrder(t *testing.T) {
	n := 200
	conds := []Condition{
		{Name: "a", Onsets: []float64{10, 70, 130, 250}, Durations: []float64{12, 12, 12, 12},
			Modulators: map[string][]float64{"rt": {0.5, 0.7, 0.6, 0.9}}},
		{Name: "b", Onsets: []float64{40, 100, 190, 300}, Durations: []float64{1, 1, 1, 1}},
	}
	opt := Options{Volumes: n, TR: 2, HRFDerivs: true, Modulate: []string{"rt"}, HighpassSec: 128,
		Confounds: []Confound{
			rampConfound("motion_x", n, func(i int) float64 { return math.Sin(float64(i) / 7) }),
			rampConfound("motion_y", n, func(i int) float64 { return math.Cos(float64(i*i) / 50) }),
		}}
	d, err := Build(conds, opt)
	if err != nil {
		t.Fatal(err)
	}
	want := "a a_deriv a_disp a_x_rt b b_deriv b_disp motion_x motion_y " +
		"cosine_01 cosine_02 cosine_03 cosine_04 cosine_05 cosine_06 intercept"
	if got := strings.Join(d.Names(), " "); got != want {
		t.Errorf("columns\n%s\nwant\n%s", got, want)
	}
	kinds := []ColumnKind{ColumnCondition, ColumnTemporal, ColumnDispersion, ColumnModulator,
		ColumnCondition, ColumnTemporal, ColumnDispersion, ColumnConfound, ColumnConfound,
		ColumnDrift, ColumnDrift, ColumnDrift, ColumnDrift, ColumnDrift, ColumnDrift, ColumnIntercept}
	for i, k := range kinds {
		if d.Columns[i].Kind != k {
			t.Errorf("column %q kind %v, want %v", d.Columns[i].Name, d.Columns[i].Kind, k)
		}
	}
	if d.Columns[3].Modulator != "rt" || d.Columns[3].Condition != "a" {
		t.Errorf("modulator column %+v", d.Columns[3])
	}
	if r, c := d.X.Dims(); r != n || c != len(kinds) {
		t.Errorf("X is %d×%d, want %d×%d", r, c, n, len(kinds))
	}
	if len(d.Warnings) != 0 {
		t.Errorf("unexpected warnings %q", d.Warnings)
	}
	// Cosine columns are the DCT vectors; the intercept is ones.
	c1 := make([]float64, n)
	Cosine(c1, 1)
	if maxAbsDiff(column(d, "cosine_01"), c1) != 0 {
		t.Error("cosine_01 is not the first DCT-II vector")
	}
	for _, v := range column(d, "intercept") {
		if v != 1 {
			t.Fatal("intercept is not all ones")
		}
	}
}

// TestModulatorAndConfoundCentring: n/a modulator values get amplitude 0 and
// are left out of the mean; confound n/a values become 0 before mean-centring
// (methods §a.6 and §n).
func TestModulatorAndConfoundCentring(t *testing.T) {
	n := 60
	nan := math.NaN()
	c := Condition{Name: "go", Onsets: []float64{4, 20, 36, 60, 90}, Durations: []float64{2, 2, 2, 2, 0},
		Modulators: map[string][]float64{"rt": {0.4, nan, 0.8, 0.3, 0.5}}}
	conf := rampConfound("fd", n, func(i int) float64 { return float64(i % 7) })
	conf.Values[0] = nan
	d, err := Build([]Condition{c}, Options{Volumes: n, TR: 2, Modulate: []string{"rt"}, Confounds: []Confound{conf}})
	if err != nil {
		t.Fatal(err)
	}
	mean := (0.4 + 0.8 + 0.3 + 0.5) / 4
	area := HRFArea()
	ev := []Event{
		{4, 2, (0.4 - mean) / area}, {36, 2, (0.8 - mean) / area}, {60, 2, (0.3 - mean) / area}, {90, 0, (0.5 - mean) / area},
	}
	if e := maxAbsDiff(column(d, "go_x_rt"), regressor(d.Times, ev, BasisCanonical)); e > tolClosedForm {
		t.Errorf("modulated column differs from the hand-centred one by %g", e)
	}
	want := make([]float64, n)
	s := 0.0
	for i := 1; i < n; i++ {
		want[i] = float64(i % 7)
		s += want[i]
	}
	for i := range want {
		want[i] -= s / float64(n)
	}
	if e := maxAbsDiff(column(d, "fd"), want); e > tolClosedForm {
		t.Errorf("confound column differs from n/a→0 then centred by %g", e)
	}
	if !hasWarning(d, `confound "fd": 1 n/a values set to 0`) {
		t.Errorf("warnings %q lack the n/a note", d.Warnings)
	}
}

func hasWarning(d *Design, sub string) bool {
	for _, w := range d.Warnings {
		if strings.Contains(w, sub) {
			return true
		}
	}
	return false
}

// TestDroppedColumns: all-zero columns are dropped with a warning (methods
// §a.6 and §c.1), and events beyond the run's end are reported.
func TestDroppedColumns(t *testing.T) {
	n := 50 // run end 100 s
	conds := []Condition{
		{Name: "a", Onsets: []float64{10, 50, 120}, Durations: []float64{5, 5, 5},
			Modulators: map[string][]float64{"rt": {1, 1, 1}, "acc": {math.NaN(), math.NaN(), math.NaN()}}},
		{Name: "none"},
		{Name: "late", Onsets: []float64{150, 160}, Durations: []float64{2, 2}},
		{Name: "early", Onsets: []float64{-60}, Durations: []float64{10}}, // ends 51 s before the first sample
		{Name: "b", Onsets: []float64{30, 70}, Durations: []float64{3, 3}},
	}
	opt := Options{Volumes: n, TR: 2, HRFDerivs: false, Modulate: []string{"rt", "acc"},
		Confounds: []Confound{rampConfound("const", n, func(int) float64 { return 3.5 })}}
	d, err := Build(conds, opt)
	if err != nil {
		t.Fatal(err)
	}
	if got := strings.Join(d.Names(), " "); got != "a b intercept" {
		t.Errorf("columns %q, want \"a b intercept\"", got)
	}
	for _, w := range []string{
		`condition "a": 1 of 3 events start at or after the end of the run (100 s)`,
		`modulator "rt" is constant within condition "a"`,
		`modulator "acc" has no values (all n/a) in condition "a"`,
		`condition "none" has no events`,
		`condition "late": 2 of 2 events start at or after the end of the run`,
		`condition "late" has no event within reach`,
		`condition "early" has no event within reach`,
		`confound "const" is constant`,
	} {
		if !hasWarning(d, w) {
			t.Errorf("no warning %q in %q", w, d.Warnings)
		}
	}
	if len(d.Warnings) != 8 {
		t.Errorf("%d warnings, want 8: %q", len(d.Warnings), d.Warnings)
	}
}

// TestBuildErrors: bad input gives a clear error, never a panic.
func TestBuildErrors(t *testing.T) {
	ok := []Condition{{Name: "a", Onsets: []float64{4, 30}, Durations: []float64{10, 10}}}
	noise := func(name string, n, seed int) Confound {
		return rampConfound(name, n, func(i int) float64 { return math.Sin(float64((i+3)*(seed+2)) * 1.7) })
	}
	var many []Confound
	for c := 0; c < 11; c++ {
		many = append(many, noise(fmt.Sprintf("c%d", c), 10, c))
	}
	// A confound equal to condition a's column plus a constant: after
	// centring it is a − ā·intercept, a three-column dependency.
	base, err := Build(ok, Options{Volumes: 40, TR: 2})
	if err != nil {
		t.Fatal(err)
	}
	aCol := column(base, "a")
	shifted := Confound{Name: "a_copy", Values: make([]float64, 40)}
	for i, v := range aCol {
		shifted.Values[i] = 2*v + 3
	}
	c1 := Confound{Name: "slow", Values: make([]float64, 40)}
	Cosine(c1.Values, 1)
	for i := range c1.Values {
		c1.Values[i] *= -4
	}
	twoCond := []Condition{ok[0], {Name: "b", Onsets: []float64{60}, Durations: []float64{5}},
		{Name: "a2", Onsets: []float64{4, 30}, Durations: []float64{10, 10}}}
	cases := []struct {
		name  string
		conds []Condition
		opt   Options
		want  string
	}{
		{"one volume", ok, Options{Volumes: 1, TR: 2}, "design: 1 volumes, want at least 2 volumes"},
		{"zero TR", ok, Options{Volumes: 40, TR: 0}, "design: TR = 0 s, want a positive number of seconds"},
		{"negative TR", ok, Options{Volumes: 40, TR: -2}, "design: TR = -2 s"},
		{"NaN TR", ok, Options{Volumes: 40, TR: math.NaN()}, "design: TR = NaN s"},
		{"infinite TR", ok, Options{Volumes: 40, TR: math.Inf(1)}, "design: TR = +Inf s"},
		{"sample fraction", ok, Options{Volumes: 40, TR: 2, SampleFraction: ptr(1.5)}, "design: sample fraction = 1.5, want 0 to 1"},
		{"negative high-pass", ok, Options{Volumes: 40, TR: 2, HighpassSec: -1}, "design: high-pass cutoff = -1 s"},
		{"confound rows", ok, Options{Volumes: 200, TR: 2, Confounds: []Confound{noise("x", 180, 1)}},
			"confounds: 180 rows, want 200 (one per volume)"},
		{"too few volumes", nil, Options{Volumes: 10, TR: 2, Confounds: many},
			"design: 12 columns but only 10 volumes; need at least 13 volumes"},
		{"collinear pair", twoCond, Options{Volumes: 40, TR: 2},
			`design: columns "a" and "a2" are collinear`},
		{"three-way dependency", []Condition{ok[0], {Name: "b", Onsets: []float64{60}, Durations: []float64{5}}},
			Options{Volumes: 40, TR: 2, Confounds: []Confound{shifted}},
			`design: columns "a", "a_copy" and "intercept" are linearly dependent`},
		{"confound equals a cosine", ok, Options{Volumes: 40, TR: 2, HighpassSec: 40, Confounds: []Confound{c1}},
			`design: columns "slow" and "cosine_01" are collinear`},
		{"confound named like a condition", ok, Options{Volumes: 40, TR: 2, Confounds: []Confound{noise("a", 40, 1)}},
			`design: column name "a" is used twice (condition "a" and confound "a")`},
		{"condition named intercept", []Condition{{Name: "intercept", Onsets: []float64{3}, Durations: []float64{1}}},
			Options{Volumes: 40, TR: 2}, `design: column name "intercept" is used twice`},
		{"derivative name clash", []Condition{ok[0], {Name: "a_deriv", Onsets: []float64{3}, Durations: []float64{1}}},
			Options{Volumes: 40, TR: 2, HRFDerivs: true}, `design: column name "a_deriv" is used twice`},
		{"durations length", []Condition{{Name: "a", Onsets: []float64{1, 2}, Durations: []float64{1}}},
			Options{Volumes: 40, TR: 2}, `design: condition "a": 1 durations for 2 onsets`},
		{"negative duration", []Condition{{Name: "a", Onsets: []float64{1}, Durations: []float64{-1}}},
			Options{Volumes: 40, TR: 2}, `design: condition "a", event 1: duration -1`},
		{"NaN onset", []Condition{{Name: "a", Onsets: []float64{math.NaN()}, Durations: []float64{1}}},
			Options{Volumes: 40, TR: 2}, `design: condition "a", event 1: onset NaN`},
		{"empty condition name", []Condition{{Name: ""}}, Options{Volumes: 40, TR: 2}, "design: condition 1 has an empty name"},
		{"unknown modulator", ok, Options{Volumes: 40, TR: 2, Modulate: []string{"rt"}},
			`design: modulator "rt" is not a column of any condition's events`},
		{"modulator length", []Condition{{Name: "a", Onsets: []float64{1}, Durations: []float64{1},
			Modulators: map[string][]float64{"rt": {1, 2}}}}, Options{Volumes: 40, TR: 2},
			`design: condition "a": modulator "rt" has 2 values for 1 events`},
		{"infinite confound", ok, Options{Volumes: 3, TR: 2, Confounds: []Confound{{Name: "x", Values: []float64{1, math.Inf(1), 0}}}},
			`confounds: column "x", row 2: +Inf, want a finite number`},
		{"too large", ok, Options{Volumes: 1 << 23, TR: 2, HighpassSec: 128}, "more than the limit of"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			d, err := Build(c.conds, c.opt)
			if err == nil {
				t.Fatalf("no error; columns %q", d.Names())
			}
			if !strings.Contains(err.Error(), c.want) {
				t.Errorf("error %q, want %q", err, c.want)
			}
		})
	}
	_, err = Build(ok, Options{Volumes: 200, TR: 2, Confounds: []Confound{noise("x", 180, 1)}})
	var re *ConfoundRowsError
	if !errors.As(err, &re) || re.Rows != 180 || re.Want != 200 {
		t.Errorf("confound rows error %v is not a *ConfoundRowsError{180, 200}", err)
	}
	_, err = Build(twoCond, Options{Volumes: 40, TR: 2})
	var ce *CollinearError
	if !errors.As(err, &ce) || strings.Join(ce.Columns, ",") != "a,a2" {
		t.Errorf("collinear error %v does not list a, a2", err)
	}
}

// TestWriteTSV: header of names, one row per volume, values that read back
// to the same float64.
func TestWriteTSV(t *testing.T) {
	f := loadHRF(t)
	d, err := Build([]Condition{fixtureCondition(f)}, Options{Volumes: 40, TR: 2, HighpassSec: 64, HRFDerivs: true})
	if err != nil {
		t.Fatal(err)
	}
	var buf bytes.Buffer
	if err := d.WriteTSV(&buf); err != nil {
		t.Fatal(err)
	}
	lines := strings.Split(strings.TrimSuffix(buf.String(), "\n"), "\n")
	if len(lines) != 41 {
		t.Fatalf("%d lines, want 41", len(lines))
	}
	if lines[0] != strings.Join(d.Names(), "\t") {
		t.Errorf("header %q", lines[0])
	}
	for i, l := range lines[1:] {
		cells := strings.Split(l, "\t")
		if len(cells) != len(d.Columns) {
			t.Fatalf("row %d has %d cells", i+1, len(cells))
		}
		for j, s := range cells {
			v, err := strconv.ParseFloat(s, 64)
			if err != nil || v != d.X.At(i, j) {
				t.Fatalf("row %d, column %d: %q does not read back to %v", i+1, j, s, d.X.At(i, j))
			}
		}
	}
}
