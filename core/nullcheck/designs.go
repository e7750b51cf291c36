package nullcheck

import (
	"cmp"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"slices"

	"gonum.org/v1/gonum/mat"

	"winnow/core/design"
)

// Defaults of the null check.
const (
	DefaultDesigns = 40         // chance designs when the check is switched on without a count
	MaxDesigns     = 1000       // upper limit on the number of chance designs
	DefaultSeed    = 0x6e756c6c // seed of the PCG generator when Options.Seed is 0
	// MinTolerance is the smallest 1 − R² a null column may keep when it is regressed on
	// every other column of [null | real] (a variance inflation factor of at most 10,
	// the usual rule of thumb; common practice). Draws below it are redrawn.
	MinTolerance = 0.1
	// drawsPerDesign bounds the attempts: at most drawsPerDesign·K draws in all.
	drawsPerDesign = 50
)

// Options describes the run and the model of the real design; the null designs are
// built with the same settings (design.Build), without drift, confounds or intercept,
// which the real design contributes.
type Options struct {
	Designs        int    // K; 0: DefaultDesigns
	Seed           uint64 // 0: DefaultSeed
	Volumes        int
	TR             float64
	SampleFraction *float64
	HRFDerivs      bool
	Modulate       []string
	// Conditions names the conditions whose chance columns are modelled (those the
	// contrasts use); nil: all. Every event of every condition is still placed, so the
	// layout of the modelled ones is that of the full design.
	Conditions []string
}

// Placement names how the onsets of a chance design were drawn.
type Placement int

const (
	// PlacementSpaced: events in random order, non-overlapping, at least the real design's
	// minimum spacing apart, the free time spread uniformly over the gaps.
	PlacementSpaced Placement = iota
	// PlacementFree: the real events overlap so much that they cannot be laid out one after
	// the other in their span; each onset is uniform on [start, end − duration].
	PlacementFree
)

func (p Placement) String() string {
	if p == PlacementFree {
		return "independent uniform onsets (the real events overlap)"
	}
	return "random order, uniform gaps, minimum spacing kept"
}

// Designs is a set of chance designs drawn from a real design.
type Designs struct {
	K       int
	Columns []string             // null column names, the real design's condition columns, in order
	Real    []int                // for each null column, its column index in the real design
	X       []*mat.Dense         // per design: Volumes × len(Columns)
	Events  [][]design.Condition // per design: the drawn conditions
	Draws   int                  // draws made, rejected ones included

	Placement  Placement
	Span       [2]float64 // start of the first real event, end of the last, seconds
	MinSpacing float64    // seconds between one event's end and the next one's start, ≥ 0

	// Reference is set when the events tile their span with no gap and every condition is
	// modelled: each chance design is then a relabelling of the real events, the union of
	// its events is the real union, and its columns of each basis (canonical, temporal and
	// dispersion derivatives) sum to the real ones. The reference condition's columns are
	// left out of the chance model (the real design carries their sum), so the chance
	// coefficients are differences from it, and only contrasts whose weights over the
	// conditions sum to zero per basis are testable (Contrast).
	Reference string
	dropped   []int // real column indices of the reference condition's left-out columns
}

// conditionKind reports whether a design column models a condition (and so has a null
// counterpart).
func conditionKind(k design.ColumnKind) bool {
	switch k {
	case design.ColumnCondition, design.ColumnTemporal, design.ColumnDispersion, design.ColumnModulator:
		return true
	}
	return false
}

type item struct {
	cond     int
	duration float64
	mods     []float64 // aligned with modNames
}

// Draw draws opt.Designs chance designs from the real conditions conds, which built the
// real design real with the same opt (methods: see the package documentation).
// Each chance design keeps every condition's event count, each event's duration and
// modulator values, and the smallest gap between consecutive real events; it lies inside
// the span of the real events. A draw whose null columns are (near) collinear with the
// other columns of [null | real] is redrawn.
func Draw(conds []design.Condition, real *design.Design, opt Options) (*Designs, error) {
	k := opt.Designs
	if k == 0 {
		k = DefaultDesigns
	}
	if k < 1 || k > MaxDesigns {
		return nil, fmt.Errorf("null check: %d chance designs, want 1 to %d", k, MaxDesigns)
	}
	if real == nil || real.X == nil {
		return nil, errors.New("null check: no real design")
	}
	n, p := real.X.Dims()
	if n != opt.Volumes {
		return nil, fmt.Errorf("null check: the real design has %d rows, want %d (one per volume)", n, opt.Volumes)
	}
	d := &Designs{K: k}
	for j, c := range real.Columns {
		if conditionKind(c.Kind) && (opt.Conditions == nil || slices.Contains(opt.Conditions, c.Condition)) {
			d.Columns = append(d.Columns, c.Name)
			d.Real = append(d.Real, j)
		}
	}
	if len(d.Columns) == 0 {
		return nil, errors.New("null check: the design has no condition column; there is nothing to draw")
	}
	q := len(d.Columns)
	if n <= p+q {
		return nil, fmt.Errorf("null check: %d volumes cannot fit the %d real and %d chance columns; want more than %d volumes", n, p, q, p+q)
	}

	// The real events, in time order.
	modNames := slices.Clone(opt.Modulate)
	var items []item
	type span struct{ on, end float64 }
	var spans []span
	for ci, c := range conds {
		for e, o := range c.Onsets {
			it := item{cond: ci, duration: c.Durations[e]}
			for _, m := range modNames {
				v := math.NaN()
				if vals, ok := c.Modulators[m]; ok {
					v = vals[e]
				}
				it.mods = append(it.mods, v)
			}
			items = append(items, it)
			spans = append(spans, span{o, o + c.Durations[e]})
		}
	}
	if len(items) == 0 {
		return nil, errors.New("null check: the conditions hold no events")
	}
	slices.SortStableFunc(spans, func(a, b span) int { return cmp.Compare(a.on, b.on) })
	d.Span = [2]float64{spans[0].on, spans[0].end}
	gap := math.Inf(1)
	total := 0.0
	for i, s := range spans {
		d.Span[1] = math.Max(d.Span[1], s.end)
		total += s.end - s.on
		if i > 0 {
			gap = math.Min(gap, s.on-spans[i-1].end)
		}
	}
	if math.IsInf(gap, 1) || gap < 0 {
		gap = 0
	}
	d.MinSpacing = gap
	free := (d.Span[1] - d.Span[0]) - total - float64(len(items)-1)*gap
	if free < 0 {
		d.Placement = PlacementFree
	}
	if free <= 1e-9*math.Max(1, d.Span[1]-d.Span[0]) && d.Placement == PlacementSpaced {
		d.dropReference(conds, real, opt.Conditions)
	}

	rng := rand.New(rand.NewPCG(cmp.Or(opt.Seed, DefaultSeed), 0x636865636b))
	bopt := design.Options{Volumes: n, TR: opt.TR, SampleFraction: opt.SampleFraction, HRFDerivs: opt.HRFDerivs, Modulate: opt.Modulate}
	order := make([]int, len(items))
	u := make([]float64, len(items))
	why := ""
	for d.Draws = 0; len(d.X) < k; d.Draws++ {
		if d.Draws >= drawsPerDesign*k {
			return nil, fmt.Errorf("null check: only %d of %d chance designs could be drawn that are not collinear with the real design (%d draws; last rejection: %s); the events fill their span too tightly for randomised onsets", len(d.X), k, d.Draws, why)
		}
		nc := make([]design.Condition, len(conds))
		for ci, c := range conds {
			nc[ci] = design.Condition{Name: c.Name}
			if len(modNames) > 0 {
				nc[ci].Modulators = map[string][]float64{}
			}
		}
		for i := range order {
			order[i] = i
		}
		rng.Shuffle(len(order), func(i, j int) { order[i], order[j] = order[j], order[i] })
		if d.Placement == PlacementSpaced {
			for i := range u {
				u[i] = rng.Float64() * free
			}
			slices.Sort(u)
		}
		at := d.Span[0]
		for i, oi := range order {
			it := items[oi]
			var on float64
			if d.Placement == PlacementSpaced {
				on = at + u[i]
				at += it.duration + gap
			} else {
				on = d.Span[0] + rng.Float64()*math.Max(0, d.Span[1]-d.Span[0]-it.duration)
			}
			c := &nc[it.cond]
			c.Onsets = append(c.Onsets, on)
			c.Durations = append(c.Durations, it.duration)
			for mi, m := range modNames {
				if _, ok := conds[it.cond].Modulators[m]; ok {
					c.Modulators[m] = append(c.Modulators[m], it.mods[mi])
				}
			}
		}
		x, reason := d.build(nc, bopt, real.X)
		if x == nil {
			why = reason
			continue
		}
		d.X = append(d.X, x)
		d.Events = append(d.Events, nc)
	}
	return d, nil
}

// dropReference handles events that tile their span: when every condition with events is
// modelled, the last one becomes the reference and its unmodulated columns leave the
// chance model (see Designs.Reference).
func (d *Designs) dropReference(conds []design.Condition, real *design.Design, modelled []string) {
	last := ""
	for _, c := range conds {
		if len(c.Onsets) == 0 {
			continue
		}
		if modelled != nil && !slices.Contains(modelled, c.Name) {
			return // an unmodelled condition's events vary the union: no constraint
		}
		last = c.Name
	}
	if last == "" {
		return
	}
	var cols []string
	var idx []int
	for k, name := range d.Columns {
		c := real.Columns[d.Real[k]]
		if c.Condition == last && c.Kind != design.ColumnModulator {
			d.dropped = append(d.dropped, d.Real[k])
			continue
		}
		cols, idx = append(cols, name), append(idx, d.Real[k])
	}
	if len(cols) == 0 {
		d.dropped = nil
		return // a single condition: nothing to compare it with (the draw reports it)
	}
	d.Columns, d.Real, d.Reference = cols, idx, last
}

// build makes the null columns of one draw with design.Build (so the kernel, its
// normalisation, derivatives and modulators are literally those of the real design) and
// checks them against the real design. It returns nil and the reason when the draw must be
// redrawn.
func (d *Designs) build(nc []design.Condition, bopt design.Options, xr *mat.Dense) (*mat.Dense, string) {
	b, err := design.Build(nc, bopt)
	if err != nil {
		return nil, err.Error() // e.g. collinear null columns
	}
	n, p := xr.Dims()
	q := len(d.Columns)
	x := mat.NewDense(n, q, nil)
	for j, name := range d.Columns {
		col := slices.IndexFunc(b.Columns, func(c design.Column) bool { return c.Name == name })
		if col < 0 {
			return nil, fmt.Sprintf("column %q is all zero in the chance design", name)
		}
		for t := range n {
			x.Set(t, j, b.X.At(t, col))
		}
	}
	// Tolerance of each null column against all other columns of [null | real], on
	// columns scaled to unit norm: 1 − R² = 1/(G⁻¹)_jj with G the Gram matrix.
	all := mat.NewDense(n, q+p, nil)
	all.Slice(0, n, 0, q).(*mat.Dense).Copy(x)
	all.Slice(0, n, q, q+p).(*mat.Dense).Copy(xr)
	for j := range q + p {
		c := all.ColView(j)
		nrm := mat.Norm(c, 2)
		if nrm == 0 {
			return nil, "a column is all zero"
		}
		for t := range n {
			all.Set(t, j, all.At(t, j)/nrm)
		}
	}
	var g mat.SymDense
	g.SymOuterK(1, all.T())
	var ch mat.Cholesky
	if !ch.Factorize(&g) {
		return nil, "the chance columns are collinear with the real design"
	}
	var inv mat.SymDense
	if err := ch.InverseTo(&inv); err != nil {
		return nil, "the chance columns are collinear with the real design"
	}
	for j := range q {
		if tol := 1 / inv.At(j, j); !(tol >= MinTolerance) {
			return nil, fmt.Sprintf("column %q keeps %.3g of its variance against the other columns, below %g", d.Columns[j], tol, MinTolerance)
		}
	}
	return x, ""
}

// Contrast maps the weights of a real contrast (rows over the real design's columns) onto
// the null columns, by column name. A contrast that puts weight on a column that does not
// model a condition (a confound, drift, the intercept) has no chance counterpart and is
// refused.
//
// With a reference condition (Designs.Reference) the chance coefficients are differences
// from the reference, so a row must weigh the conditions' columns of each basis with
// weights that sum to zero (a comparison such as a − b); its weights on the other
// conditions then carry over unchanged.
func (d *Designs) Contrast(name string, weights [][]float64, real []design.Column) ([][]float64, error) {
	out := make([][]float64, len(weights))
	for i, row := range weights {
		if len(row) != len(real) {
			return nil, fmt.Errorf("null check: contrast %q row %d has %d weights, want %d (one per design column)", name, i+1, len(row), len(real))
		}
		if d.Reference != "" {
			sums := map[design.ColumnKind]float64{}
			scale := map[design.ColumnKind]float64{}
			for j, w := range row {
				if c := real[j]; c.Condition != "" && c.Kind != design.ColumnModulator {
					sums[c.Kind] += w
					scale[c.Kind] += math.Abs(w)
				}
			}
			for kind, sum := range sums {
				if math.Abs(sum) > 1e-9*scale[kind] {
					return nil, fmt.Errorf("null check: the events tile the run without gaps, so a chance design is a relabelling of the real events and can only compare conditions; contrast %q has %s weights summing to %g; want weights that sum to zero, such as a - b", name, kind, sum)
				}
			}
		}
		out[i] = make([]float64, len(d.Columns))
		for j, w := range row {
			if w == 0 || slices.Contains(d.dropped, j) {
				continue
			}
			k := slices.Index(d.Real, j)
			if k < 0 {
				return nil, fmt.Errorf("null check: contrast %q weighs column %q (%s), which has no chance counterpart; want a contrast over condition columns only", name, real[j].Name, real[j].Kind)
			}
			out[i][k] = w
		}
	}
	return out, nil
}
