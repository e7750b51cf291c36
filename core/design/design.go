package design

import (
	"bufio"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"

	"gonum.org/v1/gonum/mat"
)

// Condition is one trial type of a run.
type Condition struct {
	Name       string               // the trial_type; names the main column
	Onsets     []float64            // seconds from the start of the first volume
	Durations  []float64            // seconds, ≥ 0, aligned with Onsets; 0 is an impulse
	Modulators map[string][]float64 // column name -> value per event (NaN = n/a)
}

// Confound is one nuisance column, one value per volume (NaN = n/a).
type Confound struct {
	Name   string
	Values []float64
}

// Options describes the run and the model.
type Options struct {
	Volumes int     // scans in the run, ≥ 2
	TR      float64 // seconds
	// SampleFraction is the slice-timing reference: scan k is sampled at
	// (k + f)·TR with f in [0, 1]. nil means 0.5, the middle of the volume;
	// data slice-time corrected to a reference slice acquired at s seconds
	// into the TR use s/TR.
	SampleFraction *float64
	HRFDerivs      bool     // add the temporal and dispersion derivative columns
	Modulate       []string // modulator names, looked up in each Condition's Modulators
	HighpassSec    float64  // cosine cutoff period, seconds; 0 = no drift columns
	Confounds      []Confound
}

// DefaultSampleFraction is the f of (k + f)·TR used when Options.SampleFraction is nil.
const DefaultSampleFraction = 0.5

// ColumnKind says what a design column models.
type ColumnKind int

const (
	ColumnCondition  ColumnKind = iota // a condition's canonical regressor
	ColumnTemporal                     // its temporal derivative, suffix "_deriv"
	ColumnDispersion                   // its dispersion derivative, suffix "_disp"
	ColumnModulator                    // a parametric modulator, suffix "_x_" + modulator
	ColumnConfound                     // a confound, mean-centred
	ColumnDrift                        // a discrete cosine, "cosine_01", ...
	ColumnIntercept                    // the constant, "intercept"
)

// String returns the kind in lower case, e.g. "condition", "drift".
func (k ColumnKind) String() string {
	switch k {
	case ColumnCondition:
		return "condition"
	case ColumnTemporal:
		return "temporal"
	case ColumnDispersion:
		return "dispersion"
	case ColumnModulator:
		return "modulator"
	case ColumnConfound:
		return "confound"
	case ColumnDrift:
		return "drift"
	case ColumnIntercept:
		return "intercept"
	}
	return fmt.Sprintf("ColumnKind(%d)", int(k))
}

// Column describes one design column.
type Column struct {
	Name      string
	Kind      ColumnKind
	Condition string // the condition it belongs to; "" for confounds, drift and intercept
	Modulator string // for ColumnModulator: the modulator's name
}

// Design is a design matrix with its column names.
type Design struct {
	X        *mat.Dense // Volumes × len(Columns)
	Columns  []Column
	Times    []float64 // sample time of each volume, seconds
	Warnings []string
}

// Names returns the column names in order.
func (d *Design) Names() []string {
	s := make([]string, len(d.Columns))
	for i, c := range d.Columns {
		s[i] = c.Name
	}
	return s
}

// WriteTSV writes the design as a tab-separated table: a header row of the
// column names, then one row per volume, each value in the shortest form that
// reads back to the same float64 (strconv 'g', precision −1).
func (d *Design) WriteTSV(w io.Writer) error {
	bw := bufio.NewWriter(w)
	bw.WriteString(strings.Join(d.Names(), "\t"))
	bw.WriteByte('\n')
	r, c := d.X.Dims()
	var buf []byte
	for i := 0; i < r; i++ {
		buf = buf[:0]
		for j := 0; j < c; j++ {
			if j > 0 {
				buf = append(buf, '\t')
			}
			buf = strconv.AppendFloat(buf, d.X.At(i, j), 'g', -1, 64)
		}
		buf = append(buf, '\n')
		if _, err := bw.Write(buf); err != nil {
			return err
		}
	}
	return bw.Flush()
}

// Column name suffixes of a condition's extra regressors.
const (
	suffixTemporal   = "_deriv"
	suffixDispersion = "_disp"
	infixModulator   = "_x_"
	interceptName    = "intercept"
)

func cosineName(j int) string { return fmt.Sprintf("cosine_%02d", j) }

// MaxCells bounds Volumes × columns, checked before the design is allocated.
const MaxCells = 1 << 24

// ConfoundRowsError reports a confounds table whose row count is not the
// number of volumes.
type ConfoundRowsError struct{ Rows, Want int }

func (e *ConfoundRowsError) Error() string {
	return fmt.Sprintf("confounds: %d rows, want %d (one per volume)", e.Rows, e.Want)
}

// CollinearError reports design columns that are linearly dependent: a
// minimal set, each of which is a combination of the others.
type CollinearError struct{ Columns []string }

func (e *CollinearError) Error() string {
	q := make([]string, len(e.Columns))
	for i, c := range e.Columns {
		q[i] = strconv.Quote(c)
	}
	if len(q) == 2 {
		return fmt.Sprintf("design: columns %s and %s are collinear", q[0], q[1])
	}
	return fmt.Sprintf("design: columns %s and %s are linearly dependent",
		strings.Join(q[:len(q)-1], ", "), q[len(q)-1])
}

// candidate is a column before the all-zero and rank checks.
type candidate struct {
	col  Column
	x    []float64
	zero string // if non-empty, the column is dropped with this warning
}

// Build makes the design matrix of one run. Columns, in order: for each
// condition, its canonical regressor (named by the condition), then with
// HRFDerivs its temporal ("NAME_deriv") and dispersion ("NAME_disp")
// derivatives, then one column per modulator of Options.Modulate that the
// condition carries ("NAME_x_MOD"); the confounds, mean-centred, under their
// own names; the drift cosines "cosine_01", "cosine_02", ...; and the
// "intercept". All-zero columns are dropped with a warning; any other rank
// deficiency is an error naming the dependent columns.
func Build(conds []Condition, opt Options) (*Design, error) {
	n := opt.Volumes
	if n < 2 {
		return nil, fmt.Errorf("design: %d volumes, want at least 2 volumes", n)
	}
	if !(opt.TR > 0) || math.IsInf(opt.TR, 0) {
		return nil, fmt.Errorf("design: TR = %g s, want a positive number of seconds", opt.TR)
	}
	f := DefaultSampleFraction
	if opt.SampleFraction != nil {
		f = *opt.SampleFraction
		if !(f >= 0 && f <= 1) {
			return nil, fmt.Errorf("design: sample fraction = %g, want 0 to 1 (scan k sampled at (k + f)·TR)", f)
		}
	}
	if !(opt.HighpassSec >= 0) || math.IsInf(opt.HighpassSec, 0) {
		return nil, fmt.Errorf("design: high-pass cutoff = %g s, want 0 (off) or a positive number of seconds", opt.HighpassSec)
	}
	if err := validate(conds, opt); err != nil {
		return nil, err
	}

	// Column count, then names, before anything large is allocated.
	K := NumCosines(n, opt.TR, opt.HighpassSec)
	ncol := len(opt.Confounds) + K + 1
	for _, c := range conds {
		ncol++
		if opt.HRFDerivs {
			ncol += 2
		}
		for _, m := range opt.Modulate {
			if _, ok := c.Modulators[m]; ok {
				ncol++
			}
		}
	}
	if float64(n)*float64(ncol) > MaxCells {
		return nil, fmt.Errorf("design: %d volumes × %d columns = %.0f values, more than the limit of %d",
			n, ncol, float64(n)*float64(ncol), MaxCells)
	}
	owner := map[string]string{}
	dup := func(name, what string) error {
		if prev, ok := owner[name]; ok {
			return fmt.Errorf("design: column name %q is used twice (%s and %s)", name, prev, what)
		}
		owner[name] = what
		return nil
	}
	for _, c := range conds {
		if err := dup(c.Name, fmt.Sprintf("condition %q", c.Name)); err != nil {
			return nil, err
		}
		if opt.HRFDerivs {
			if err := dup(c.Name+suffixTemporal, fmt.Sprintf("temporal derivative of %q", c.Name)); err != nil {
				return nil, err
			}
			if err := dup(c.Name+suffixDispersion, fmt.Sprintf("dispersion derivative of %q", c.Name)); err != nil {
				return nil, err
			}
		}
		for _, m := range opt.Modulate {
			if _, ok := c.Modulators[m]; ok {
				if err := dup(c.Name+infixModulator+m, fmt.Sprintf("modulator %q of %q", m, c.Name)); err != nil {
					return nil, err
				}
			}
		}
	}
	for _, c := range opt.Confounds {
		if err := dup(c.Name, fmt.Sprintf("confound %q", c.Name)); err != nil {
			return nil, err
		}
	}
	for j := 1; j <= K; j++ {
		if err := dup(cosineName(j), "drift cosine"); err != nil {
			return nil, err
		}
	}
	if err := dup(interceptName, "the intercept"); err != nil {
		return nil, err
	}

	d := &Design{Times: SampleTimes(n, opt.TR, f)}
	area := HRFArea()
	runEnd := float64(n) * opt.TR
	var cands []candidate

	for _, c := range conds {
		events := make([]Event, len(c.Onsets))
		late := 0
		for i, o := range c.Onsets {
			events[i] = Event{Onset: o, Duration: c.Durations[i], Amplitude: 1 / area}
			if o >= runEnd {
				late++
			}
		}
		if late > 0 {
			d.Warnings = append(d.Warnings, fmt.Sprintf(
				"condition %q: %d of %d events start at or after the end of the run (%g s) and add nothing",
				c.Name, late, len(events), runEnd))
		}
		can := regressor(d.Times, events, BasisCanonical)
		cc := candidate{col: Column{Name: c.Name, Kind: ColumnCondition, Condition: c.Name}, x: can}
		switch {
		case len(events) == 0:
			cc.zero = fmt.Sprintf("condition %q has no events; its column is dropped", c.Name)
		case negligible(can, 1/area):
			cc.zero = fmt.Sprintf("condition %q has no event within reach of the run's scans; its column is dropped", c.Name)
		}
		cands = append(cands, cc)
		if cc.zero != "" {
			// Its derivatives and modulators are zero too; one warning says it.
			continue
		}
		if opt.HRFDerivs {
			tmp := regressor(d.Times, events, BasisTemporal)
			dis := regressor(d.Times, events, BasisDispersion)
			tz := orthogonalise(tmp, can)
			dz := orthogonalise(dis, can, tmp)
			ct := candidate{col: Column{Name: c.Name + suffixTemporal, Kind: ColumnTemporal, Condition: c.Name}, x: tmp}
			if tz {
				ct.zero = fmt.Sprintf("column %q is zero after orthogonalisation; dropped", ct.col.Name)
			}
			cd := candidate{col: Column{Name: c.Name + suffixDispersion, Kind: ColumnDispersion, Condition: c.Name}, x: dis}
			if dz {
				cd.zero = fmt.Sprintf("column %q is zero after orthogonalisation; dropped", cd.col.Name)
			}
			cands = append(cands, ct, cd)
		}
		for _, m := range opt.Modulate {
			vals, ok := c.Modulators[m]
			if !ok {
				continue
			}
			cands = append(cands, modulated(c, m, vals, d.Times, area))
		}
	}

	for _, cf := range opt.Confounds {
		x := make([]float64, n)
		copy(x, cf.Values)
		na := 0
		for i, v := range x {
			if math.IsNaN(v) {
				x[i] = 0
				na++
			}
		}
		if na > 0 {
			d.Warnings = append(d.Warnings, fmt.Sprintf("confound %q: %d n/a values set to 0", cf.Name, na))
		}
		centre(x)
		cc := candidate{col: Column{Name: cf.Name, Kind: ColumnConfound}, x: x}
		if allZero(x) {
			cc.zero = fmt.Sprintf("confound %q is constant (zero after mean-centring); its column is dropped", cf.Name)
		}
		cands = append(cands, cc)
	}
	for j := 1; j <= K; j++ {
		x := make([]float64, n)
		Cosine(x, j)
		cands = append(cands, candidate{col: Column{Name: cosineName(j), Kind: ColumnDrift}, x: x})
	}
	one := make([]float64, n)
	for i := range one {
		one[i] = 1
	}
	cands = append(cands, candidate{col: Column{Name: interceptName, Kind: ColumnIntercept}, x: one})

	var cols [][]float64
	for _, c := range cands {
		if c.zero == "" && allZero(c.x) {
			c.zero = fmt.Sprintf("column %q is all zero; dropped", c.col.Name)
		}
		if c.zero != "" {
			d.Warnings = append(d.Warnings, c.zero)
			continue
		}
		d.Columns = append(d.Columns, c.col)
		cols = append(cols, c.x)
	}
	p := len(cols)
	if n <= p {
		return nil, fmt.Errorf("design: %d columns but only %d volumes; need at least %d volumes", p, n, p+1)
	}
	if err := checkRank(cols, d.Names()); err != nil {
		return nil, err
	}
	data := make([]float64, n*p)
	for j, x := range cols {
		for i, v := range x {
			data[i*p+j] = v
		}
	}
	d.X = mat.NewDense(n, p, data)
	return d, nil
}

// validate checks the conditions, modulators and confounds against opt.
func validate(conds []Condition, opt Options) error {
	for ci, c := range conds {
		if c.Name == "" {
			return fmt.Errorf("design: condition %d has an empty name", ci+1)
		}
		if len(c.Durations) != len(c.Onsets) {
			return fmt.Errorf("design: condition %q: %d durations for %d onsets", c.Name, len(c.Durations), len(c.Onsets))
		}
		for i, o := range c.Onsets {
			if math.IsNaN(o) || math.IsInf(o, 0) {
				return fmt.Errorf("design: condition %q, event %d: onset %g, want a finite number of seconds", c.Name, i+1, o)
			}
			dd := c.Durations[i]
			if !(dd >= 0) || math.IsInf(dd, 0) {
				return fmt.Errorf("design: condition %q, event %d: duration %g, want a finite number of seconds ≥ 0", c.Name, i+1, dd)
			}
		}
		for m, v := range c.Modulators {
			if len(v) != len(c.Onsets) {
				return fmt.Errorf("design: condition %q: modulator %q has %d values for %d events", c.Name, m, len(v), len(c.Onsets))
			}
		}
	}
	seen := map[string]bool{}
	for _, m := range opt.Modulate {
		if m == "" {
			return fmt.Errorf("design: empty modulator name")
		}
		if seen[m] {
			return fmt.Errorf("design: modulator %q named twice", m)
		}
		seen[m] = true
		found := false
		for _, c := range conds {
			if _, ok := c.Modulators[m]; ok {
				found = true
				for i, v := range c.Modulators[m] {
					if math.IsInf(v, 0) {
						return fmt.Errorf("design: condition %q, event %d: modulator %q = %g, want a finite number or n/a", c.Name, i+1, m, v)
					}
				}
			}
		}
		if !found {
			return fmt.Errorf("design: modulator %q is not a column of any condition's events", m)
		}
	}
	for ci, c := range opt.Confounds {
		if c.Name == "" {
			return fmt.Errorf("confounds: column %d has an empty name", ci+1)
		}
		if len(c.Values) != opt.Volumes {
			return &ConfoundRowsError{Rows: len(c.Values), Want: opt.Volumes}
		}
		for i, v := range c.Values {
			if math.IsInf(v, 0) {
				return fmt.Errorf("confounds: column %q, row %d: %g, want a finite number", c.Name, i+1, v)
			}
		}
	}
	return nil
}

// modulated builds the regressor of modulator m of condition c: each event's
// amplitude is its value minus the mean over the condition's events that
// have one; events with n/a (NaN) get amplitude 0 (methods §a.6).
func modulated(c Condition, m string, vals, times []float64, area float64) candidate {
	col := Column{Name: c.Name + infixModulator + m, Kind: ColumnModulator, Condition: c.Name, Modulator: m}
	sum, cnt := 0.0, 0
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, v := range vals {
		if !math.IsNaN(v) {
			sum += v
			cnt++
			lo, hi = math.Min(lo, v), math.Max(hi, v)
		}
	}
	if cnt == 0 {
		return candidate{col: col, zero: fmt.Sprintf("modulator %q has no values (all n/a) in condition %q; column %q dropped", m, c.Name, col.Name)}
	}
	if lo == hi {
		return candidate{col: col, zero: fmt.Sprintf("modulator %q is constant within condition %q; column %q dropped", m, c.Name, col.Name)}
	}
	mean := sum / float64(cnt)
	events := make([]Event, 0, len(vals))
	maxAmp := 0.0
	for i, v := range vals {
		if math.IsNaN(v) {
			continue
		}
		a := (v - mean) / area
		maxAmp = math.Max(maxAmp, math.Abs(a))
		events = append(events, Event{Onset: c.Onsets[i], Duration: c.Durations[i], Amplitude: a})
	}
	x := regressor(times, events, BasisCanonical)
	cd := candidate{col: col, x: x}
	if negligible(x, maxAmp) {
		cd.zero = fmt.Sprintf("column %q is all zero within the run; dropped", col.Name)
	}
	return cd
}

// regressor returns the exact regressor of events at times.
func regressor(times []float64, events []Event, b Basis) []float64 {
	x := make([]float64, len(times))
	AddRegressor(x, times, events, b)
	return x
}

// negligible reports whether every |x| is at most 1e−9 of scale: an event
// set whose response barely reaches the scans (e.g. ending just under 32 s
// before the first) would otherwise give a column of rounding-level values.
func negligible(x []float64, scale float64) bool {
	lim := 1e-9 * math.Abs(scale)
	for _, v := range x {
		if math.Abs(v) > lim {
			return false
		}
	}
	return true
}

func allZero(x []float64) bool {
	for _, v := range x {
		if v != 0 {
			return false
		}
	}
	return true
}

// centre subtracts the mean from x.
func centre(x []float64) {
	s := 0.0
	for _, v := range x {
		s += v
	}
	m := s / float64(len(x))
	for i := range x {
		x[i] -= m
	}
}

// orthogonalise removes from x, in place, its projection on each of the
// columns in on (taken in order, each already orthogonal to the ones before:
// classical Gram–Schmidt over the scan samples, methods §a.2). It reports
// whether what is left is negligible: below 1e−9 of x's norm before.
func orthogonalise(x []float64, on ...[]float64) bool {
	before := math.Sqrt(dot(x, x))
	for _, q := range on {
		qq := dot(q, q)
		if qq == 0 {
			continue
		}
		c := dot(x, q) / qq
		for i, v := range q {
			x[i] -= c * v
		}
	}
	return math.Sqrt(dot(x, x)) <= 1e-9*before
}

func dot(a, b []float64) float64 {
	s := 0.0
	for i, v := range a {
		s += v * b[i]
	}
	return s
}
