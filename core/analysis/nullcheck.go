package analysis

import (
	"context"
	"fmt"
	"math"
	"slices"

	"winnow/core/contrast"
	"winnow/core/design"
	"winnow/core/dist"
	"winnow/core/events"
	"winnow/core/glm"
	"winnow/core/infer"
	"winnow/core/nullcheck"
	"winnow/core/report"
)

// MaxNullCheckBytes bounds the memory of the null check's sums; a larger request is refused
// before anything is allocated.
const MaxNullCheckBytes = 2 << 30

// chanceCheck is the chance-design check of a first-level fit (package nullcheck): the
// chance designs, their sums (filled in the same pass as the real fit) and the user's
// contrasts moved onto the chance columns.
type chanceCheck struct {
	designs *nullcheck.Designs
	acc     *nullcheck.Accumulator
	weights [][][]float64 // per contrast: rows over the null columns
	names   []string
}

// newNullCheck draws k chance designs from the run's own design before the pass (k = 0:
// the check is off and nil is returned). Problems are input errors naming --null-check: a
// contrast that weighs a column with no chance counterpart, a design whose events leave no
// room for chance layouts, or sums that would exceed MaxNullCheckBytes.
func newNullCheck(k int, ev *events.Events, des *design.Design, cons []*contrast.Contrast, opt FitOptions, nvol int, tr float64, dims [3]int, voxels []int32, real nullcheck.RealSums) (*chanceCheck, error) {
	if k == 0 {
		return nil, nil
	}
	const flag = "--null-check"
	if k < 0 || k > nullcheck.MaxDesigns {
		return nil, inputErrf(flag, "%d chance designs; want 0 (off) or 1 to %d (%d is usual)", k, nullcheck.MaxDesigns, nullcheck.DefaultDesigns)
	}
	// Model chance columns for the conditions the contrasts use (all their columns:
	// canonical, derivatives, modulators); the real design keeps all of them.
	used := []string{}
	for _, c := range cons {
		for _, row := range c.Weights {
			for j, w := range row {
				if w == 0 {
					continue
				}
				col := des.Columns[j]
				if col.Condition == "" {
					return nil, inputErrf(flag, "contrast %q weighs column %q (%s), which has no chance counterpart; want a contrast over condition columns only", c.Name, col.Name, col.Kind)
				}
				if !slices.Contains(used, col.Condition) {
					used = append(used, col.Condition)
				}
			}
		}
	}
	d, err := nullcheck.Draw(conditionsOf(ev, opt.Modulate), des, nullcheck.Options{
		Designs: k, Volumes: nvol, TR: tr, HRFDerivs: opt.HRFDerivs, Modulate: opt.Modulate, Conditions: used,
	})
	if err != nil {
		return nil, inputErr(flag, err)
	}
	nc := &chanceCheck{designs: d}
	for _, c := range cons {
		w, err := d.Contrast(c.Name, c.Weights, des.Columns)
		if err != nil {
			return nil, inputErr(flag, err)
		}
		nc.weights = append(nc.weights, w)
		nc.names = append(nc.names, c.Name)
	}
	_, p := des.X.Dims()
	whiten := opt.Noise != glm.NoiseOLS
	b := nullcheck.Bytes(d, p, len(voxels), whiten)
	if real != nil {
		b = nullcheck.SharedBytes(d, len(voxels), whiten)
	}
	if b > MaxNullCheckBytes {
		return nil, inputErrf(flag, "%d chance designs over %d voxels need %d MB for their sums, more than the limit of %d MB; want fewer designs", k, len(voxels), b>>20, MaxNullCheckBytes>>20)
	}
	if real != nil {
		// The real design's sums are gathered once, by the real fit's accumulator.
		nc.acc = nullcheck.NewSharedAccumulator(d, des.X, dims, voxels, whiten, real)
	} else {
		nc.acc = nullcheck.NewAccumulator(d, des.X, dims, voxels, whiten)
	}
	return nc, nil
}

// conditionsOf gathers the events into the design's conditions, in the order and with the
// modulators buildDesign uses.
func conditionsOf(ev *events.Events, modulate []string) []design.Condition {
	order := ev.Conditions()
	conds := make([]design.Condition, len(order))
	byName := map[string]*design.Condition{}
	for i, name := range order {
		conds[i] = design.Condition{Name: name}
		if len(modulate) > 0 {
			conds[i].Modulators = map[string][]float64{}
		}
		byName[name] = &conds[i]
	}
	for k, e := range ev.Events {
		c := byName[e.TrialType]
		c.Onsets = append(c.Onsets, e.Onset)
		c.Durations = append(c.Durations, e.Duration)
		for _, m := range modulate {
			c.Modulators[m] = append(c.Modulators[m], ev.Numeric[m][k])
		}
	}
	return conds
}

// AddVolume folds the next volume (the same one the real fit gets) into the chance
// designs' sums. A nil check does nothing.
func (nc *chanceCheck) AddVolume(vol []float32) {
	if nc != nil {
		nc.acc.AddVolume(vol)
	}
}

// finishNullCheck fits every chance design at the real fit's AR(1) coefficients (none under
// --noise ols), applies the run's correction to each of its contrast maps through the same
// thresholding as the real contrasts (r.threshold, with the real fit's mask and resels), and
// records how many designs had a finding: any surviving voxel (for cluster-level methods,
// any surviving cluster) in any contrast. It sets Summary.NullCheck and adds a warning when
// the interval's lower bound lies above alpha. A nil check does nothing.
func (r *FitResult) finishNullCheck(ctx context.Context, nc *chanceCheck, fit *glm.Fit, opt FitOptions) error {
	if nc == nil {
		return nil
	}
	rec, err := r.nullCount(ctx, nc, fit, opt)
	if err != nil {
		return err
	}
	r.null = &nullResult{rec: rec, method: opt.Correct, alpha: opt.Alpha, clusterP: opt.ClusterP}
	r.applyNullCheck(opt.Correct, opt.Alpha, opt.ClusterP)
	return nil
}

// nullResult is the null check's count under the settings it was made with.
type nullResult struct {
	rec             report.NullCheck
	method          infer.Method
	alpha, clusterP float64
}

// applyNullCheck puts the null check into the summary when the current
// settings are the ones it was measured with; under other settings it would
// describe something else, so the summary says null and a warning explains.
func (r *FitResult) applyNullCheck(method infer.Method, alpha, clusterP float64) {
	if r.null == nil {
		return
	}
	n := r.null
	if n.method != method || n.alpha != alpha || (method.ClusterLevel() && n.clusterP != clusterP) {
		r.Summary.NullCheck = nil
		r.Summary.Warnings = append(r.Summary.Warnings, fmt.Sprintf("the null check was measured with %s at alpha %g; fit again to check these settings", n.method, n.alpha))
		return
	}
	rec := n.rec
	r.Summary.NullCheck = &rec
	if w := nullcheck.Warning(rec, alpha); w != "" {
		r.Summary.Warnings = append(r.Summary.Warnings, w)
	}
}

// nullCount solves the chance designs and counts those with a finding under
// opt.Correct, opt.Alpha and opt.ClusterP.
func (r *FitResult) nullCount(ctx context.Context, nc *chanceCheck, fit *glm.Fit, opt FitOptions) (report.NullCheck, error) {
	var rho []float64
	if fit.Noise != glm.NoiseOLS {
		rho = fit.Rho
	}
	k := nc.designs.K
	found := 0
	var scratch report.Contrast
	pFloor := opt.Alpha
	if opt.Correct.ClusterLevel() {
		pFloor = math.Max(pFloor, opt.ClusterP)
	}
	err := nc.acc.Solve(rho, fit.Valid, nc.weights, func(d int, stats []nullcheck.Stat) error {
		if err := ctx.Err(); err != nil {
			return err
		}
		hit := false
		for c, st := range stats {
			cs := nullContrast(nc.names[c], st, r, pFloor)
			r.threshold(cs, &scratch, opt.Correct, opt.Alpha, opt.ClusterP)
			for _, s := range cs.survive {
				if s {
					hit = true
					break
				}
			}
			if hit {
				break
			}
		}
		if hit {
			found++
		}
		opt.progress("null check", d+1, k)
		return nil
	})
	if err != nil {
		return report.NullCheck{}, err
	}
	return nullcheck.Record(found, k), nil
}

// nullContrast makes the inference state of one chance design's contrast over the kept
// voxels, as addContrast does for a real contrast, except that ln p and z are computed only
// where they can matter: at voxels whose p is at most pFloor = max(alpha, cluster-forming p).
// No correction lets a voxel with a larger p survive or change which others survive
// (uncorrected, Bonferroni, Holm, BH and BY reject only p ≤ alpha, or less; cluster-rft
// forms clusters from p ≤ cluster-forming p; fwe-rft reads the statistic, which is exact
// everywhere; the rank-based procedures only count such voxels), so they get p = 1
// (ln p = 0) and z = −Inf, and r.threshold gives exactly the survivors the full conversion
// would. This skips the conversion at most voxels of every chance design.
func nullContrast(name string, st nullcheck.Stat, r *FitResult, pFloor float64) *contrastState {
	cs := &contrastState{name: name, f: st.F, df1: st.DF1, df2: st.DF2}
	if !st.F {
		cs.df1, cs.df2 = st.DF2, 0
	}
	cs.stat = r.pick(st.Stat)
	cs.logp = make([]float64, len(cs.stat))
	cs.z = make([]float64, len(cs.stat))
	lFloor := math.Log(pFloor)
	sFloor := cs.statFromLogP(lFloor)
	for i, s := range cs.stat {
		switch {
		case s < sFloor:
			cs.logp[i], cs.z[i] = 0, math.Inf(-1)
		case cs.f:
			cs.logp[i] = dist.FLogSF(s, cs.df1, cs.df2)
			cs.z[i] = dist.FToZ(s, cs.df1, cs.df2)
		default:
			cs.logp[i] = dist.TLogSF(s, cs.df1)
			cs.z[i] = dist.TToZ(s, cs.df1)
		}
	}
	return cs
}
