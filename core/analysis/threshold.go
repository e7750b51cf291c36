package analysis

import (
	"fmt"
	"math"
	"slices"
	"strings"

	"winnow/core/cluster"
	"winnow/core/contrast"
	"winnow/core/dist"
	"winnow/core/glm"
	"winnow/core/infer"
	"winnow/core/nifti"
	"winnow/core/report"
)

// finishMask drops the voxels the fit excluded (no variance) and those that
// held non-finite values.
func (r *FitResult) finishMask(fit *glm.Fit, nonFinite []bool) {
	r.Mask = make([]bool, r.Grid.Voxels())
	r.keep = r.keep[:0]
	for k, v := range fit.Voxels {
		if fit.Valid[k] && !nonFinite[v] {
			r.Mask[v] = true
			r.voxels = append(r.voxels, v)
			r.keep = append(r.keep, k)
		}
	}
}

func (r *FitResult) excludedCounts(fit *glm.Fit, nonFinite []bool) (nf, constant int) {
	for k, v := range fit.Voxels {
		switch {
		case nonFinite[v]:
			nf++
		case !fit.Valid[k]:
			constant++
		}
	}
	return nf, constant
}

// grid32 spreads per-voxel values (over r.voxels) onto the full grid.
func (r *FitResult) grid32(vals []float64) []float32 {
	out := make([]float32, r.Grid.Voxels())
	for k, v := range r.voxels {
		out[v] = float32(vals[k])
	}
	return out
}

// pick takes the kept voxels' values from a per-fit-voxel slice.
func (r *FitResult) pick(x []float64) []float64 {
	out := make([]float64, len(r.keep))
	for i, k := range r.keep {
		out[i] = x[k]
	}
	return out
}

func (r *FitResult) addContrast(c *contrast.Contrast, spec string, st *glm.Stat, fit *glm.Fit) *contrastState {
	cs := &contrastState{name: c.Name, spec: spec, f: st.F, df1: st.DF1, df2: st.DF2}
	if !st.F {
		cs.df1, cs.df2 = st.DF2, 0 // a t statistic has one df, the error df
	}
	cs.stat = r.pick(st.Stat)
	cs.logp = make([]float64, len(cs.stat))
	cs.z = make([]float64, len(cs.stat))
	parallelRange(len(cs.stat), func(lo, hi int) {
		for i := lo; i < hi; i++ {
			s := cs.stat[i]
			if cs.f {
				cs.logp[i] = dist.FLogSF(s, cs.df1, cs.df2)
				cs.z[i] = dist.FToZ(s, cs.df1, cs.df2)
			} else {
				cs.logp[i] = dist.TLogSF(s, cs.df1)
				cs.z[i] = dist.TToZ(s, cs.df1)
			}
		}
	})
	idx := len(r.contrasts)
	r.contrasts = append(r.contrasts, cs)
	kind, statKind, intent := "t", "t", 3
	ip := [3]float64{cs.df1}
	if cs.f {
		kind, statKind, intent = "F", "F", 4
		ip = [3]float64{cs.df1, cs.df2}
	}
	maps := report.Maps{
		Stat:        c.Name + "_" + statKind + ".nii.gz",
		Z:           c.Name + "_z.nii.gz",
		Effect:      c.Name + "_effect.nii.gz",
		Thresholded: c.Name + "_thresholded.nii.gz",
	}
	r.Maps = append(r.Maps,
		Map{File: maps.Stat, Contrast: idx, Kind: "stat", Data: r.grid32(cs.stat), Write: nifti.WriteOptions{IntentCode: intent, IntentP: ip, Descrip: "winnow " + kind + " " + c.Name}},
		Map{File: maps.Z, Contrast: idx, Kind: "z", Data: r.grid32(cs.z), Write: nifti.WriteOptions{IntentCode: 5, Descrip: "winnow z " + c.Name}},
	)
	if cs.f {
		// An F contrast's effect is the root mean square of its rows' effects.
		r.Maps = append(r.Maps, Map{File: maps.Effect, Contrast: idx, Kind: "effect", Data: r.grid32(r.pick(st.Effect)), Write: nifti.WriteOptions{Descrip: "winnow rms effect " + c.Name}})
	} else {
		maps.SE = c.Name + "_se.nii.gz"
		r.Maps = append(r.Maps,
			Map{File: maps.Effect, Contrast: idx, Kind: "effect", Data: r.grid32(r.pick(st.Effect)), Write: nifti.WriteOptions{Descrip: "winnow effect " + c.Name}},
			Map{File: maps.SE, Contrast: idx, Kind: "se", Data: r.grid32(r.pick(st.SE)), Write: nifti.WriteOptions{Descrip: "winnow se " + c.Name}},
		)
	}
	r.Maps = append(r.Maps, Map{File: maps.Thresholded, Contrast: idx, Kind: "thresholded", Data: make([]float32, r.Grid.Voxels()), Write: nifti.WriteOptions{IntentCode: intent, IntentP: ip, Descrip: "winnow thresholded " + c.Name}})
	df := []float64{cs.df1}
	if cs.f {
		df = []float64{cs.df1, cs.df2}
	}
	r.Summary.Contrasts = append(r.Summary.Contrasts, report.Contrast{Name: c.Name, Kind: kind, Spec: spec, DF: df, Maps: maps, Clusters: []report.Cluster{}})
	return cs
}

func (r *FitResult) addRunMaps(fit *glm.Fit) {
	mask := make([]float32, r.Grid.Voxels())
	for _, v := range r.voxels {
		mask[v] = 1
	}
	r.Maps = append(r.Maps,
		Map{File: "mean.nii.gz", Contrast: -1, Kind: "mean", Data: r.grid32(r.pick(fit.Mean)), Write: nifti.WriteOptions{Descrip: "winnow temporal mean"}},
		Map{File: "mask.nii.gz", Contrast: -1, Kind: "mask", Data: mask, Write: nifti.WriteOptions{Datatype: nifti.Uint8, Descrip: "winnow analysis mask"}},
		Map{File: "residual_sd.nii.gz", Contrast: -1, Kind: "sd", Data: r.grid32(sqrtAll(r.pick(fit.Sigma2))), Write: nifti.WriteOptions{Descrip: "winnow residual sd"}},
	)
	if fit.Rho != nil {
		r.Maps = append(r.Maps, Map{File: "ar1_rho.nii.gz", Contrast: -1, Kind: "rho", Data: r.grid32(r.pick(fit.Rho)), Write: nifti.WriteOptions{Descrip: "winnow AR(1) coefficient"}})
	}
	r.baseWarnings = append([]string(nil), r.Summary.Warnings...)
}

func sqrtAll(x []float64) []float64 {
	for i, v := range x {
		x[i] = math.Sqrt(v)
	}
	return x
}

// MapOf returns the map of the given kind for contrast c (-1 for run maps).
func (r *FitResult) MapOf(c int, kind string) *Map {
	for i := range r.Maps {
		if r.Maps[i].Contrast == c && r.Maps[i].Kind == kind {
			return &r.Maps[i]
		}
	}
	return nil
}

// Rethreshold applies a correction method to every contrast without
// refitting: it rewrites the contrasts' inference in the summary and the
// thresholded maps.
func (r *FitResult) Rethreshold(method infer.Method, alpha, clusterP float64) error {
	if method == infer.MethodDefault {
		method = infer.MethodFWERFT
	}
	if !method.FirstLevel() {
		return inputErrf("--correct", "%q is for group analyses only; want one of %s", method, strings.Join(firstLevelMethods(), ", "))
	}
	if err := checkLevels(alpha, clusterP); err != nil {
		return err
	}
	warn := append([]string(nil), r.baseWarnings...)
	warn = append(warn, infer.Warnings(method, clusterP, r.fwhmVox)...)
	for i, cs := range r.contrasts {
		out := &r.Summary.Contrasts[i]
		w := r.threshold(cs, out, method, alpha, clusterP)
		warn = append(warn, w...)
		thr := r.MapOf(i, "thresholded")
		clear(thr.Data)
		for k, v := range r.voxels {
			if cs.survive[k] {
				thr.Data[v] = float32(cs.stat[k])
			}
		}
	}
	r.Summary.Warnings = warn
	r.applyNullCheck(method, alpha, clusterP)
	return nil
}

// PrepareRethreshold computes ahead what a re-threshold by a rank-based
// method (bonferroni, holm, fdr-bh, fdr-by) would compute on first use: each
// contrast's order of p-values and adjusted ln p-values. The results of every later re-threshold are unchanged;
// the page's worker calls it while idle after a fit, so that the first such
// re-threshold is as fast as the next ones.
func (r *FitResult) PrepareRethreshold() {
	for _, cs := range r.contrasts {
		if cs.logp == nil {
			continue
		}
		for _, m := range []infer.Method{infer.MethodBonferroni, infer.MethodHolm, infer.MethodFDRBH, infer.MethodFDRBY} {
			cs.adjustedLogP(m)
		}
	}
}

// adjustedLogP returns the contrast's adjusted ln p-values under a rank-based
// method (bonferroni, holm, fdr-bh, fdr-by). They do not depend on alpha, so
// they are made once per contrast and method and kept for re-thresholding.
func (cs *contrastState) adjustedLogP(method infer.Method) []float64 {
	if a := cs.adjusted[method]; a != nil {
		return a
	}
	if method != infer.MethodBonferroni && cs.order == nil {
		cs.order = infer.Order(cs.logp) // fixed per contrast: kept for re-thresholding
	}
	const level = 0.05 // any level: only the adjusted ln p are kept
	var adj infer.Adjusted
	switch method {
	case infer.MethodBonferroni:
		adj = infer.Bonferroni(cs.logp, level)
	case infer.MethodHolm:
		adj = infer.HolmOrdered(cs.logp, cs.order, level)
	case infer.MethodFDRBH:
		adj = infer.BHOrdered(cs.logp, cs.order, level)
	default:
		adj = infer.BYOrdered(cs.logp, cs.order, level)
	}
	if cs.adjusted == nil {
		cs.adjusted = map[infer.Method][]float64{}
	}
	cs.adjusted[method] = adj.LogP
	return adj.LogP
}

// field is the random field the contrast's statistic forms.
func (cs *contrastState) field() infer.Field {
	if cs.f {
		return infer.Field{Kind: infer.FieldF, DF1: cs.df1, DF2: cs.df2}
	}
	return infer.Field{Kind: infer.FieldT, DF2: cs.df1}
}

// statFromLogP inverts the contrast's upper tail.
func (cs *contrastState) statFromLogP(logp float64) float64 {
	if cs.f {
		return dist.FFromLogSF(logp, cs.df1, cs.df2)
	}
	return dist.TFromLogSF(logp, cs.df1)
}

func (cs *contrastState) zOf(stat float64) float64 {
	if cs.f {
		return dist.FToZ(stat, cs.df1, cs.df2)
	}
	return dist.TToZ(stat, cs.df1)
}

func ptr[T any](v T) *T { return &v }

// threshold fills out's inference fields for one contrast and sets
// cs.survive. It returns warnings specific to this contrast.
func (r *FitResult) threshold(cs *contrastState, out *report.Contrast, method infer.Method, alpha, clusterP float64) []string {
	var warn []string
	m := len(cs.stat)
	cs.survive = make([]bool, m)
	out.Correction = method.String()
	out.Alpha = alpha
	out.Corrected = method != infer.MethodNone
	out.ClusterP = nil
	out.ClusterExtent = nil
	out.ThresholdSource = method.String()
	out.StatThreshold, out.ZThreshold = nil, nil
	setThr := func(u float64) {
		if math.IsNaN(u) || math.IsInf(u, 0) {
			return
		}
		out.StatThreshold = ptr(u)
		out.ZThreshold = ptr(cs.zOf(u))
	}
	// peakP gives the corrected p of a cluster's peak voxel k.
	var peakP func(k int) *float64
	switch method {
	case infer.MethodNone:
		lt := math.Log(alpha)
		for k, lp := range cs.logp {
			cs.survive[k] = lp <= lt
		}
		setThr(cs.statFromLogP(lt))
		out.ThresholdSource = "uncorrected"
		peakP = func(int) *float64 { return nil }
	case infer.MethodBonferroni, infer.MethodHolm, infer.MethodFDRBH, infer.MethodFDRBY:
		// The adjusted ln p-values do not depend on alpha: made once per contrast and
		// method, then each level is a comparison (infer.Reject).
		adjLogP := cs.adjustedLogP(method)
		rejected, lt := infer.Reject(cs.logp, adjLogP, alpha)
		for k, lp := range cs.logp {
			cs.survive[k] = lp <= lt
		}
		if method == infer.MethodBonferroni {
			setThr(infer.BonferroniThreshold(cs.field(), m, alpha))
		} else if rejected > 0 {
			setThr(cs.statFromLogP(lt))
		}
		peakP = func(k int) *float64 { return ptr(math.Exp(adjLogP[k])) }
	case infer.MethodFWERFT:
		f := cs.field()
		uB := infer.BonferroniThreshold(f, m, alpha)
		uR := infer.RFTThreshold(r.resels, f, alpha)
		u := uR
		out.ThresholdSource = "rft"
		if !(uR <= uB) {
			u = uB
			out.ThresholdSource = "bonferroni"
			warn = append(warn, fmt.Sprintf("%s: the random-field threshold (%.3g) is above Bonferroni's (%.3g) at this smoothness; Bonferroni's is used", cs.name, uR, uB))
		}
		for k, s := range cs.stat {
			cs.survive[k] = s >= u
		}
		setThr(u)
		peakP = func(k int) *float64 {
			p, _ := infer.VoxelP(r.resels, f, m, cs.stat[k])
			return ptr(p)
		}
	case infer.MethodClusterRFT:
		u := dist.ZFromLogSF(math.Log(clusterP))
		out.ClusterP = ptr(clusterP)
		above := make([]bool, r.Grid.Voxels())
		for k, v := range r.voxels {
			above[v] = cs.z[k] >= u
		}
		crft, err := infer.NewClusterRFT(r.resels, m, u)
		if err != nil {
			warn = append(warn, cs.name+": cluster extent inference is not possible here: "+err.Error())
			r.fillClusters(cs, out, func(int, int) *float64 { return nil })
			return warn
		}
		labels, sizes := cluster.Label(above, r.Grid.Dims, cluster.Corners)
		keepLabel := make([]bool, len(sizes)+1)
		for l, n := range sizes {
			keepLabel[l+1] = crft.P(float64(n)) <= alpha
		}
		for k, v := range r.voxels {
			cs.survive[k] = keepLabel[labels[v]]
		}
		setThr(cs.statFromLogP(math.Log(clusterP)))
		out.ThresholdSource = "cluster-forming"
		if kc := crft.KCrit(alpha); !math.IsNaN(kc) && !math.IsInf(kc, 0) {
			out.ClusterExtent = ptr(int(math.Ceil(kc)))
		}
		peakP = nil // per-cluster p by extent, below
		r.fillClusters(cs, out, func(n int, _ int) *float64 { return ptr(crft.P(float64(n))) })
		return warn
	}
	r.fillClusters(cs, out, func(_ int, k int) *float64 { return peakP(k) })
	return warn
}

// fillClusters labels the surviving voxels and writes the cluster table.
// p gives a cluster's corrected p from its size and its peak's voxel number.
//
// The statistic's grid is kept with the contrast and the grid of surviving
// voxels is reused, so a re-threshold allocates no grid-sized array.
func (r *FitResult) fillClusters(cs *contrastState, out *report.Contrast, p func(size, peak int) *float64) {
	nv := r.Grid.Voxels()
	if len(cs.statGrid) != nv {
		cs.statGrid = make([]float32, nv)
		for k, v := range r.voxels {
			cs.statGrid[v] = float32(cs.stat[k])
		}
	}
	if len(r.inGrid) != nv {
		r.inGrid = make([]bool, nv)
	} else {
		clear(r.inGrid)
	}
	in := r.inGrid
	n := 0
	for k, v := range r.voxels {
		if cs.survive[k] {
			in[v] = true
			n++
		}
	}
	out.SurvivingVoxels = n
	out.Clusters = []report.Cluster{}
	if n == 0 {
		return
	}
	// pos is the in-mask number of a surviving voxel (r.voxels ascends).
	pos := func(v int) int {
		k, ok := slices.BinarySearch(r.voxels, int32(v))
		if !ok {
			panic(fmt.Sprintf("analysis: cluster voxel %d is not in the mask", v))
		}
		return k
	}
	vol := r.voxelVolume()
	for _, c := range cluster.Clusters(cs.statGrid, in, r.Grid.Dims, cluster.Corners, r.Grid.Affine, cluster.TableOptions{}) {
		k := pos(c.Peak)
		rc := report.Cluster{
			Voxels:     c.Voxels,
			VolumeMM3:  float64(c.Voxels) * vol,
			PeakIJK:    c.PeakIJK,
			PeakMM:     c.PeakMM,
			PeakStat:   cs.stat[k],
			PeakZ:      cs.z[k],
			PCorrected: p(c.Voxels, k),
		}
		for _, mx := range c.Maxima {
			mk := pos(mx.Index)
			rc.LocalMaxima = append(rc.LocalMaxima, report.Maximum{IJK: mx.IJK, MM: mx.MM, Stat: cs.stat[mk], Z: cs.z[mk]})
		}
		out.Clusters = append(out.Clusters, rc)
	}
}

func (r *FitResult) voxelVolume() float64 {
	a := r.Grid.Affine
	det := a[0][0]*(a[1][1]*a[2][2]-a[1][2]*a[2][1]) -
		a[0][1]*(a[1][0]*a[2][2]-a[1][2]*a[2][0]) +
		a[0][2]*(a[1][0]*a[2][1]-a[1][1]*a[2][0])
	return math.Abs(det)
}
