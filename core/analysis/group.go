package analysis

import (
	"bufio"
	"bytes"
	"compress/gzip"
	"context"
	"crypto/sha256"
	"encoding/gob"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"runtime"
	"slices"
	"strconv"
	"strings"
	"sync"

	"gonum.org/v1/gonum/mat"

	"winnow/core/cluster"
	"winnow/core/contrast"
	"winnow/core/design"
	"winnow/core/dist"
	"winnow/core/group"
	"winnow/core/infer"
	"winnow/core/nifti"
	"winnow/core/report"
)

// Group-level defaults (interface contract).
const (
	DefaultPerms     = 5000
	DefaultGroupSeed = 20091 // fixed, so that runs repeat exactly
)

// maxGroupBytes bounds the memory the maps of a group analysis may take.
const maxGroupBytes = 16 << 30

// GroupInputs are the files of a group analysis.
type GroupInputs struct {
	Maps   []Input // one 3D effect map per subject, all on one grid
	Design *Input  // optional design table, one row per map in the same order
	Mask   *Input  // optional analysis mask on the maps' grid
}

// GroupOptions are the settings of a group analysis. The zero value means the documented
// defaults.
type GroupOptions struct {
	Contrasts []string     // SPECs over design columns; empty without a design: "mean=mean"
	Correct   infer.Method // zero: fwe-perm
	Perms     int          // relabellings, identity included; 0: 5000
	Seed      *uint64      // nil: DefaultGroupSeed
	Alpha     float64      // 0: 0.05
	ClusterP  float64      // cluster-forming p; 0: 0.001
	Workers   int          // 0: all cores
	// Block is the most relabellings a permutation worker computes together (0: the
	// engine's default, group.Options.Block). Results do not depend on it; fewer hold less
	// memory under tfce (about 2.5 bytes per analysed voxel per relabelling).
	Block    int
	Shard    int // K of Shards (1-based): run only the K-th slice of the relabellings
	Shards   int // 0: the whole run
	Limits   nifti.Limits
	Progress func(stage string, done, total int)
}

// GroupResult is a group analysis: the summary, the maps and the permutation null. A shard
// (GroupOptions.Shards > 0) holds only its slice of the null; its WriteDir writes what
// MergeGroup needs instead of the outputs.
type GroupResult struct {
	Summary *report.Summary // nil for a shard
	Grid    nifti.Grid
	Mask    []bool
	Maps    []Map
	Design  *design.Design
	// NullMax is the permutation null of the maxima: column names and one row per relabelling
	// (nil under parametric methods).
	NullMax *NullTable

	state *groupState
	nulls []groupNull // per contrast
	shard int         // 1-based; 0 for a complete result
	// ran and ranNulls are the state and null as the run left them (every maximum it
	// recorded): Rethreshold starts from them, however often it is called.
	ran      *groupState
	ranNulls []groupNull
	// tails are per contrast of ran the log p and z of every voxel's statistic: they do not
	// depend on the method or alpha, so Rethreshold takes them over instead of computing
	// them again (the costly part of inference at 10⁵ voxels).
	tails []statTails
}

// statTails are one contrast's per-voxel log p-values and z-scores, and the corrected
// p-values of fwe-perm and tfce, which depend on the run's null but not on alpha (made on
// first use; shared by the results re-thresholded from one run).
type statTails struct {
	logp, z []float64
	perm    *permPs
	// The p order and the adjusted ln p of rank-based methods (alpha-free, made on first
	// use), kept across re-thresholds like logp and z.
	order    *[]int32
	adjusted map[infer.Method][]float64
}

type permPs struct {
	mu sync.Mutex
	p  map[permKey][]float64
}

// permKey names a cached map: a method's corrected p-values, or (log) their −log10.
type permKey struct {
	method infer.Method
	log    bool
}

// get returns the cached map of key, computing it with make on first use.
func (c *permPs) get(key permKey, make func() []float64) []float64 {
	c.mu.Lock()
	defer c.mu.Unlock()
	if c.p[key] == nil {
		c.p[key] = make()
	}
	return c.p[key]
}

// NullTable is the content of null_max.tsv.
type NullTable struct {
	Columns []string
	Rows    [][]float64 // NaN for a contrast with fewer relabellings
}

// groupState is everything inference needs besides the null: a shard stores it, and merging
// shards finishes it exactly as one run does.
type groupState struct {
	Grid        nifti.Grid
	Voxels      []int32
	DesignNames []string
	DesignX     []float64 // subjects × columns
	Base        report.Summary
	Method      infer.Method
	Alpha       float64
	ClusterP    float64
	FWHMVox     [3]float64
	Resels      infer.Resels
	Contrasts   []groupContrast
	Shards      int
	Seed        uint64 // of the relabellings: shards of one run share it
	Perms       int    // relabellings asked for
}

type groupContrast struct {
	Name, Spec  string
	F           bool
	DF1, DF2    float64 // t: [ν, 0]; F: [q, ν]
	Scheme      string
	N           int // relabellings in all
	Exhaustive  bool
	Unique      float64
	ClusterStat float64   // cluster-forming threshold on the statistic's scale
	Stat        []float64 // per voxel
	Effect      []float64 // per voxel: c'β̂ (t) or the root mean square of the rows (F)
	TFCE        []float64 // per voxel, under tfce
}

// groupNull is the null of one contrast over relabellings Lo..Hi−1.
type groupNull struct {
	Lo, Hi              int
	Stat, Cluster, TFCE []float64
}

func (o *GroupOptions) defaults() {
	if o.Alpha == 0 {
		o.Alpha = DefaultAlpha
	}
	if o.ClusterP == 0 {
		o.ClusterP = DefaultClusterP
	}
	if o.Perms == 0 {
		o.Perms = DefaultPerms
	}
	if o.Seed == nil {
		s := uint64(DefaultGroupSeed)
		o.Seed = &s
	}
	if o.Correct == infer.MethodDefault {
		o.Correct = infer.MethodFWEPerm
	}
	if o.Workers <= 0 {
		o.Workers = runtime.NumCPU()
	}
}

func (o *GroupOptions) check() error {
	if err := checkLevels(o.Alpha, o.ClusterP); err != nil {
		return err
	}
	if o.Perms < 1 || o.Perms > group.MaxPerms {
		return inputErrf("--perms", "%d; want 1 to %d", o.Perms, group.MaxPerms)
	}
	if o.Shards < 0 || (o.Shards > 0 && (o.Shard < 1 || o.Shard > o.Shards)) || (o.Shards == 0 && o.Shard != 0) {
		return inputErrf("--shard", "%d/%d; want K/N with 1 <= K <= N", o.Shard, o.Shards)
	}
	if o.Shards > 0 && !permMethod(o.Correct) {
		return inputErrf("--shard", "%s is parametric and does no permutations; want fwe-perm, cluster-perm or tfce", o.Correct)
	}
	return nil
}

func permMethod(m infer.Method) bool {
	return m == infer.MethodFWEPerm || m == infer.MethodClusterPerm || m == infer.MethodTFCE
}

func (o *GroupOptions) progress(stage string, done, total int) {
	if o.Progress != nil {
		o.Progress(stage, done, total)
	}
}

// Group runs the second-level model over per-subject effect maps (package group holds the
// numerics; winnow methods notes §j, §k, §f.1, §h).
//
// Inputs. Every map is one 3D image on the first map's grid and affine (a map that differs is
// named in the error). The design table (see [ParseGroupDesign]) has one row per map, in the
// order of the maps; without it the model is a one-sample test whose one column is "mean", and
// the contrast defaults to "mean=mean". A paired design is a one-sample test of the subjects'
// difference maps (compute condition A − condition B per subject first). Two groups are a text
// column (e.g. group = patient/control, contrast "patient - control"); covariates are numeric
// columns. The design must have full column rank and more maps than columns.
//
// Mask. A voxel is analysed when it is finite in every map, inside --mask (or, without a
// mask, non-zero in every map: first-level maps hold 0 outside their own masks), and not the
// same value in every map. Excluded voxels are counted in the summary.
//
// Inference. Each contrast is a [group.Model]: Freedman–Lane, with sign flips when the mean
// itself is tested and permutations of subjects otherwise. Perms is the number of relabellings
// including the identity: when the unique ones are no more, all are done and p is exact;
// otherwise relabelling 0 is the identity and 1..Perms−1 are random draws (seeded; identical
// for any number of workers and shards), so summary.perms = Perms and the smallest p is
// 1/Perms (= (1 + 0)/(draws + 1), Phipson & Smyth 2010). fwe-perm uses the maximum t (or F),
// cluster-perm the largest 26-connected cluster at --cluster-p, tfce the maximum TFCE of t (of
// √F for F contrasts; E 0.5, H 2, extent in voxels). stat_threshold is the (k+1)-th largest
// null maximum with k = ⌊α·N⌋ (null when k = 0, with a warning): on the t/F scale for fwe-perm,
// on the TFCE scale for tfce (z_threshold null), the cluster-forming t/F for cluster-perm (the
// smallest significant extent in cluster_extent_voxels). The parametric methods (none,
// bonferroni, holm, fdr-bh, fdr-by, fwe-rft, cluster-rft) use the t/F distribution with
// ν = n − rank(X); fwe-rft's smoothness comes from the group residuals with the ν/(ν+1)
// correction of §f.1. They do no permutations (summary.perms and null_check are null).
//
// Outputs (WriteDir): per contrast NAME_t (or NAME_F), NAME_z, NAME_effect (c'β̂; for F the
// root mean square of the rows' effects), NAME_thresholded (the statistic where it survives),
// NAME_pcorr (−log10 of the corrected p: FWE p under permutation methods, the cluster's p under
// cluster methods, the adjusted p under bonferroni/holm/FDR, RFT p under fwe-rft, uncorrected
// under none; 0 outside the mask) and under tfce NAME_tfce; null_max.tsv under permutation
// methods (column perm, then per contrast NAME_max_t or NAME_max_F, NAME_max_cluster_voxels
// under cluster-perm, NAME_max_tfce under tfce; one row per relabelling, the identity included);
// design.tsv and summary.json. summary.null_check reads the permutation null of the first
// contrast as a measurement: designs = N relabellings, with_findings = those whose maximum
// exceeds stat_threshold (or the critical extent), fwe_estimate their fraction, ci95 its
// exact Clopper–Pearson interval.
//
// Shards. With Shards > 0 only relabellings ⌊(K−1)N/S⌋..⌊KN/S⌋−1 of each contrast are done, and
// WriteDir stores them with the observed state; [MergeGroup] joins all S shards into the
// result of one run, byte for byte (the one-run path finishes from the same stored state).
func Group(ctx context.Context, in GroupInputs, opt GroupOptions) (*GroupResult, error) {
	opt.defaults()
	if err := opt.check(); err != nil {
		return nil, err
	}
	n := len(in.Maps)
	if n < 2 {
		return nil, inputErrf("--maps", "%d map(s); want at least 2 subjects' effect maps", n)
	}
	var warnings []string
	var inputs []report.InputRef

	// The design.
	var names []string
	var x *mat.Dense
	if in.Design != nil {
		dh := newHashingReader(in.Design.R)
		gd, err := ParseGroupDesign(dh)
		if err != nil {
			return nil, inputErr(in.Design.Name, err)
		}
		if err := dh.drain(); err != nil {
			return nil, inputErr(in.Design.Name, err)
		}
		if gd.Rows() != n {
			return nil, inputErrf(in.Design.Name, "%d rows, want %d (one per map of --maps, in the same order)", gd.Rows(), n)
		}
		names, x = gd.Names, gd.Matrix()
		inputs = append(inputs, dh.ref("design", in.Design.Name))
	} else {
		names = []string{"mean"}
		x = mat.NewDense(n, 1, nil)
		for i := range n {
			x.Set(i, 0, 1)
		}
	}
	specs := opt.Contrasts
	if len(specs) == 0 {
		if in.Design != nil {
			return nil, inputErrf("--contrast", "no contrast given; want at least one NAME=EXPR over the design's columns (%s)", strings.Join(names, ", "))
		}
		specs = []string{"mean=mean"}
	}
	cons := make([]*contrast.Contrast, len(specs))
	seen := map[string]bool{}
	for i, spec := range specs {
		flag := fmt.Sprintf("--contrast %q", spec)
		c, err := contrast.Parse(spec, names)
		if err != nil {
			return nil, inputErr(flag, err)
		}
		if seen[c.Name] {
			return nil, inputErrf(flag, "the name %q is used by another contrast; want distinct names", c.Name)
		}
		seen[c.Name] = true
		cons[i] = c
	}
	models := make([]*group.Model, len(cons))
	for i, c := range cons {
		m, err := group.NewModel(x, c.Weights)
		if err != nil {
			switch {
			case errors.Is(err, group.ErrRankDeficient) && in.Design != nil:
				return nil, inputErr(in.Design.Name, err)
			case errors.Is(err, group.ErrRankDeficient):
				return nil, inputErr("--maps", err)
			case strings.Contains(err.Error(), "subjects for a model"):
				return nil, inputErr("--maps", err)
			}
			return nil, inputErr(fmt.Sprintf("--contrast %q", specs[i]), err)
		}
		models[i] = m
	}

	// The maps. They are held as float32 maps, from which the analysed voxels are copied
	// once the mask is known (4·n·nvox + 4·n·nv bytes at the peak), or, when there is no mask
	// file and the first map is non-zero at most of the grid's voxels (first-level maps hold
	// 0 outside their masks, so most of the grid will be analysed), straight away as rows
	// over the whole grid, compacted in place to the analysed voxels (4·n·nvox bytes, one
	// allocation). The float32 values are the data: a model without nuisance columns keeps
	// them as they are (group.Model.PrepareFloat32), others take float64 residuals from them
	// (8·n·nv bytes more).
	var grid nifti.Grid
	var data [][]float32
	var rows []float32 // n × nvox, row i = map i, when held as one array
	nvox := 0
	for i, mi := range in.Maps {
		mh := newHashingReader(mi.R)
		h, vol, err := nifti.ReadImage(mh, opt.Limits)
		if err != nil {
			return nil, inputErr(mi.Name, err)
		}
		if h.NumVolumes() != 1 {
			return nil, inputErrf(mi.Name, "nifti: dims %v hold %d volumes; want one 3D effect map per subject", h.Dims(), h.NumVolumes())
		}
		if err := mh.drain(); err != nil {
			return nil, inputErr(mi.Name, err)
		}
		g := h.Grid()
		if i == 0 {
			grid = g
			// At most 12 bytes per map voxel are held (see above).
			if need := int64(n) * int64(g.Voxels()) * 12; need > maxGroupBytes {
				return nil, inputErrf("--maps", "%d maps of %d voxels need %.1f GiB in memory; want at most %d GiB (fewer or smaller maps)", n, g.Voxels(), float64(need)/(1<<30), maxGroupBytes>>30)
			}
			nvox = g.Voxels()
			nonZero := 0
			for _, x := range vol[:min(len(vol), nvox)] {
				if x != 0 {
					nonZero++
				}
			}
			if in.Mask == nil && 2*nonZero > nvox {
				rows = make([]float32, n*nvox)
			}
		} else if !g.SameSpace(grid) {
			return nil, inputErrf(mi.Name, "nifti: grid %v with affine %v differs from %s's %v with affine %v; want every map on the same grid", g.Dims, g.Affine, in.Maps[0].Name, grid.Dims, grid.Affine)
		}
		if len(vol) < nvox {
			return nil, inputErrf(mi.Name, "nifti: %d values, want %d (the grid %v)", len(vol), nvox, g.Dims)
		}
		if rows != nil {
			copy(rows[i*nvox:(i+1)*nvox], vol[:nvox])
		} else {
			data = append(data, vol[:nvox])
		}
		inputs = append(inputs, mh.ref("map", mi.Name))
		if err := ctx.Err(); err != nil {
			return nil, err
		}
		opt.progress("reading maps", i+1, n)
	}
	// val is map i's value at voxel v.
	val := func(i, v int) float64 {
		if rows != nil {
			return float64(rows[i*nvox+v])
		}
		return float64(data[i][v])
	}

	// The mask: finite in every map; inside --mask, or non-zero in every map without one;
	// and not the same value in every map.
	opt.progress("masking", 0, 1)
	var mask []bool
	if in.Mask != nil {
		mh := newHashingReader(in.Mask.R)
		mk, err := readMask(mh, in.Mask.Name, grid, opt.Limits)
		if err != nil {
			return nil, err
		}
		if err := mh.drain(); err != nil {
			return nil, inputErr(in.Mask.Name, err)
		}
		inputs = append(inputs, mh.ref("mask", in.Mask.Name))
		mask = mk
	} else {
		mask = make([]bool, nvox)
		for v := range mask {
			mask[v] = true
			for i := range n {
				if val(i, v) == 0 {
					mask[v] = false
					break
				}
			}
		}
	}
	nonFinite, constant := 0, 0
	var voxels []int32
	for v := range nvox {
		if !mask[v] {
			continue
		}
		ok, same := true, true
		x0 := val(0, v)
		for i := range n {
			x := val(i, v)
			if math.IsNaN(x) || math.IsInf(x, 0) {
				ok = false
				break
			}
			if x != x0 {
				same = false
			}
		}
		switch {
		case !ok:
			nonFinite++
			mask[v] = false
		case same:
			constant++
			mask[v] = false
		default:
			voxels = append(voxels, int32(v))
		}
	}
	if len(voxels) == 0 {
		f := "--maps"
		if in.Mask != nil {
			f = in.Mask.Name
		}
		return nil, inputErrf(f, "no voxel is finite, non-zero and varying in every map; want overlapping effect maps")
	}
	if nonFinite > 0 {
		warnings = append(warnings, fmt.Sprintf("%d voxels held non-finite values in some map and left the mask", nonFinite))
	}
	nv := len(voxels)
	var y []float32
	if rows != nil {
		// In place: the destination i·nv+k never lies after the source i·nvox+v (k ≤ v,
		// nv ≤ nvox), and every earlier write went to an earlier destination.
		for i := range n {
			for k, v := range voxels {
				rows[i*nv+k] = rows[i*nvox+int(v)]
			}
		}
		y, rows = rows[:n*nv], nil
	} else {
		y = make([]float32, n*nv)
		for i, d := range data {
			row := y[i*nv : (i+1)*nv]
			for k, v := range voxels {
				row[k] = d[v]
			}
		}
		data = nil
	}
	sp := group.Space{Dims: grid.Dims, Voxels: voxels}

	st := &groupState{
		Grid: grid, Voxels: voxels, DesignNames: names, DesignX: mat.DenseCopyOf(x).RawMatrix().Data,
		Method: opt.Correct, Alpha: opt.Alpha, ClusterP: opt.ClusterP, Shards: opt.Shards,
		Seed: *opt.Seed, Perms: opt.Perms,
	}
	var stats group.Stats
	switch opt.Correct {
	case infer.MethodFWEPerm:
		stats = group.MaxStat
	case infer.MethodClusterPerm:
		stats = group.MaxStat | group.MaxCluster
	case infer.MethodTFCE:
		stats = group.MaxStat | group.MaxTFCE
	}
	res := &GroupResult{Grid: grid, shard: opt.Shard}
	for i, m := range models {
		opt.progress(fmt.Sprintf("fitting the model (%s)", cons[i].Name), 0, 1)
		prob := m.PrepareFloat32(y, sp)
		if i == len(models)-1 {
			// The last model is prepared: the data are its problem's now, or garbage when it
			// took residuals from them (the page's workers' memory never shrinks, so their
			// peak is what counts; collecting now lets what follows reuse the data's place).
			y = nil
			runtime.GC()
		}
		if i == 0 {
			// Smoothness of the full model's residuals (the same for every contrast).
			opt.progress("smoothness", 0, 1)
			st.FWHMVox = prob.Smoothness()
			st.Resels = infer.CountResels(mask, grid.Dims, st.FWHMVox)
		}
		pl, err := m.Plan(opt.Perms, *opt.Seed)
		if err != nil {
			return nil, inputErr("--perms", err)
		}
		gc := groupContrast{Name: cons[i].Name, Spec: specs[i], F: m.F, Scheme: m.Scheme.String(), N: pl.N, Exhaustive: pl.Exhaustive, Unique: pl.Unique}
		if m.F {
			gc.DF1, gc.DF2 = float64(m.Q), m.DF
			gc.ClusterStat = dist.FFromLogSF(math.Log(opt.ClusterP), gc.DF1, gc.DF2)
		} else {
			gc.DF1 = m.DF
			gc.ClusterStat = dist.TFromLogSF(math.Log(opt.ClusterP), m.DF)
		}
		ropt := group.Options{Stats: stats, Cluster: gc.ClusterStat, Workers: opt.Workers, Block: opt.Block}
		opt.progress(fmt.Sprintf("observed statistic (%s)", gc.Name), 0, 1)
		obs := prob.Observe(&pl, ropt)
		gc.Stat = obs.Stat
		if len(obs.Effect) == 1 {
			gc.Effect = obs.Effect[0]
		} else {
			gc.Effect = make([]float64, nv)
			for k := range nv {
				s := 0.0
				for _, e := range obs.Effect {
					s += e[k] * e[k]
				}
				gc.Effect[k] = math.Sqrt(s / float64(len(obs.Effect)))
			}
		}
		if stats&group.MaxTFCE != 0 {
			gc.TFCE = make([]float64, nv)
			for k, v := range voxels {
				gc.TFCE[k] = obs.TFCE[v]
			}
		}
		st.Contrasts = append(st.Contrasts, gc)
		if stats == 0 {
			continue
		}
		lo, hi := 0, pl.N
		if opt.Shards > 0 {
			lo, hi = sliceOf(pl.N, opt.Shard, opt.Shards)
		}
		stage := fmt.Sprintf("permutations (%s)", gc.Name)
		ropt.Progress = func(done, total int) { opt.progress(stage, done, total) }
		null, err := prob.Run(ctx, &pl, lo, hi, ropt)
		if err != nil {
			return nil, err
		}
		res.nulls = append(res.nulls, groupNull{Lo: lo, Hi: hi, Stat: null.Stat, Cluster: null.Cluster, TFCE: null.TFCE})
	}

	// The summary's fixed part.
	var vmm [3]float64
	for j := range 3 {
		vmm[j] = st.FWHMVox[j] * grid.VoxelMM[j]
	}
	st.Base = report.Summary{
		Tool:          report.Tool{Name: "winnow", Version: report.Version},
		Dims:          []int{grid.Dims[0], grid.Dims[1], grid.Dims[2], n},
		VoxelMM:       grid.VoxelMM,
		MaskVoxels:    nv,
		DF:            models[0].DF,
		FWHMmm:        vmm,
		Resels:        st.Resels[3],
		ReselCounts:   st.Resels,
		Warnings:      warnings,
		Inputs:        inputs,
		DesignColumns: names,
	}
	if nonFinite+constant > 0 {
		st.Base.Excluded = &report.Excluded{NonFinite: nonFinite, Constant: constant}
	}
	res.state = st
	if opt.Shards > 0 {
		return res, nil
	}
	// Finish from the state as stored, exactly as a merge of shards does.
	b, _, err := encodeState(st)
	if err != nil {
		return nil, err
	}
	var stored groupState
	if err := gob.NewDecoder(bytes.NewReader(b)).Decode(&stored); err != nil {
		return nil, err
	}
	return finishGroup(&stored, res.nulls)
}

// sliceOf returns the K-th (1-based) of S contiguous slices of 0..n−1.
func sliceOf(n, k, s int) (lo, hi int) {
	return int(int64(n) * int64(k-1) / int64(s)), int(int64(n) * int64(k) / int64(s))
}

// finishGroup turns the state and the complete null into the result. One run and a merge of
// shards both end here, with the same inputs, so their outputs are identical.
func finishGroup(st *groupState, nulls []groupNull) (*GroupResult, error) {
	return finishGroupWith(st, nulls, nil)
}

// finishGroupWith is finishGroup with the log p and z of st's contrasts when already known
// (tails of a result with the same contrasts' statistics; nil: computed here).
func finishGroupWith(st *groupState, nulls []groupNull, tails []statTails) (*GroupResult, error) {
	grid := st.Grid
	nvox := grid.Voxels()
	mask := make([]bool, nvox)
	for _, v := range st.Voxels {
		mask[v] = true
	}
	sum := st.Base
	sum.Warnings = append([]string{}, st.Base.Warnings...)
	sum.Contrasts = nil
	n, p := len(st.DesignX)/len(st.DesignNames), len(st.DesignNames)
	cols := make([]design.Column, p)
	for j, name := range st.DesignNames {
		cols[j] = design.Column{Name: name, Kind: design.ColumnConfound}
		if name == "mean" {
			cols[j].Kind = design.ColumnIntercept
		}
	}
	des := &design.Design{X: mat.NewDense(n, p, append([]float64(nil), st.DesignX...)), Columns: cols}
	fr := &FitResult{Summary: &sum, Grid: grid, Mask: mask, Design: des, voxels: st.Voxels, resels: st.Resels, fwhmVox: st.FWHMVox}
	res := &GroupResult{Summary: &sum, Grid: grid, Mask: mask, Design: des, state: st, nulls: nulls, ran: st, ranNulls: nulls}
	method := st.Method
	perm := permMethod(method)
	if perm {
		res.NullMax = &NullTable{}
	}
	warn := infer.Warnings(method, st.ClusterP, st.FWHMVox)
	maxN := 0
	for ci := range st.Contrasts {
		gc := &st.Contrasts[ci]
		cs := &contrastState{name: gc.Name, spec: gc.Spec, f: gc.F, df1: gc.DF1, df2: gc.DF2, stat: gc.Stat}
		tl := statTails{perm: &permPs{p: map[permKey][]float64{}}}
		if ci < len(tails) {
			tl = tails[ci]
			cs.logp, cs.z = tl.logp, tl.z
		} else {
			cs.logp = make([]float64, len(cs.stat))
			cs.z = make([]float64, len(cs.stat))
			for k, s := range cs.stat {
				if cs.f {
					cs.logp[k] = dist.FLogSF(s, cs.df1, cs.df2)
					cs.z[k] = dist.FToZ(s, cs.df1, cs.df2)
				} else {
					cs.logp[k] = dist.TLogSF(s, cs.df1)
					cs.z[k] = dist.TToZ(s, cs.df1)
				}
			}
		}
		tl.logp, tl.z = cs.logp, cs.z
		if tl.order == nil {
			tl.order = new([]int32)
		}
		if tl.adjusted == nil {
			tl.adjusted = map[infer.Method][]float64{}
		}
		cs.order, cs.adjusted = *tl.order, tl.adjusted
		res.tails = append(res.tails, tl)
		fr.contrasts = append(fr.contrasts, cs)
		kind, statKind, intent := "t", "t", 3
		ip := [3]float64{cs.df1}
		df := []float64{cs.df1}
		if cs.f {
			kind, statKind, intent = "F", "F", 4
			ip = [3]float64{cs.df1, cs.df2}
			df = []float64{cs.df1, cs.df2}
		}
		maps := report.Maps{
			Stat:        gc.Name + "_" + statKind + ".nii.gz",
			Z:           gc.Name + "_z.nii.gz",
			Effect:      gc.Name + "_effect.nii.gz",
			Thresholded: gc.Name + "_thresholded.nii.gz",
			PCorr:       gc.Name + "_pcorr.nii.gz",
		}
		if perm && gc.TFCE != nil {
			maps.TFCE = gc.Name + "_tfce.nii.gz"
		}
		sum.Contrasts = append(sum.Contrasts, report.Contrast{Name: gc.Name, Kind: kind, Spec: gc.Spec, DF: df, Maps: maps, Clusters: []report.Cluster{}})
		out := &sum.Contrasts[ci]
		effDescrip := "winnow group effect " + gc.Name
		if cs.f {
			effDescrip = "winnow group rms effect " + gc.Name
		}
		res.Maps = append(res.Maps,
			Map{File: maps.Stat, Contrast: ci, Kind: "stat", Data: fr.grid32(cs.stat), Write: nifti.WriteOptions{IntentCode: intent, IntentP: ip, Descrip: "winnow group " + kind + " " + gc.Name}},
			Map{File: maps.Z, Contrast: ci, Kind: "z", Data: fr.grid32(cs.z), Write: nifti.WriteOptions{IntentCode: 5, Descrip: "winnow group z " + gc.Name}},
			Map{File: maps.Effect, Contrast: ci, Kind: "effect", Data: fr.grid32(gc.Effect), Write: nifti.WriteOptions{Descrip: effDescrip}},
		)
		var pcorr []float64
		if perm {
			var w []string
			pcorr, w = fr.permThreshold(cs, out, gc, nulls[ci], method, st.Alpha, st.ClusterP, tl.perm)
			warn = append(warn, w...)
			if gc.TFCE != nil {
				res.Maps = append(res.Maps, Map{File: gc.Name + "_tfce.nii.gz", Contrast: ci, Kind: "tfce", Data: fr.grid32(gc.TFCE), Write: nifti.WriteOptions{Descrip: "winnow TFCE (E 0.5, H 2, extent in voxels) " + gc.Name}})
			}
			maxN = max(maxN, gc.N)
		} else {
			warn = append(warn, fr.threshold(cs, out, method, st.Alpha, st.ClusterP)...)
			pcorr = parametricP(fr, cs, method, st.Alpha, st.ClusterP)
		}
		thr := make([]float64, len(cs.stat))
		for k, s := range cs.stat {
			if cs.survive[k] {
				thr[k] = s
			}
		}
		minusLog10 := func() []float64 {
			logp := make([]float64, len(pcorr))
			for k, pv := range pcorr {
				logp[k] = -math.Log10(pv)
				if logp[k] == 0 {
					logp[k] = 0 // no −0 in the map
				}
			}
			return logp
		}
		var logp []float64
		if method == infer.MethodFWEPerm || method == infer.MethodTFCE {
			logp = tl.perm.get(permKey{method, true}, minusLog10) // pcorr is the cached one
		} else {
			logp = minusLog10()
		}
		res.Maps = append(res.Maps,
			Map{File: gc.Name + "_thresholded.nii.gz", Contrast: ci, Kind: "thresholded", Data: fr.grid32(thr), Write: nifti.WriteOptions{IntentCode: intent, IntentP: ip, Descrip: "winnow thresholded " + gc.Name}},
			Map{File: gc.Name + "_pcorr.nii.gz", Contrast: ci, Kind: "pcorr", Data: fr.grid32(logp), Write: nifti.WriteOptions{Descrip: "winnow -log10 corrected p (" + method.String() + ") " + gc.Name}},
		)
	}
	if perm {
		ns := make([]int, len(st.Contrasts))
		for ci, gc := range st.Contrasts {
			ns[ci] = gc.N
		}
		sum.Perms = ptr(maxN)
		sum.Seed = ptr(st.Seed)
		for ci, gc := range st.Contrasts {
			if gc.N != maxN {
				warn = append(warn, fmt.Sprintf("%s: %d relabellings (all the unique ones), fewer than the %d of other contrasts", gc.Name, gc.N, maxN))
			}
			if gc.Exhaustive {
				warn = append(warn, fmt.Sprintf("%s: all %d unique %s done (exact p-values)", gc.Name, gc.N, gc.Scheme))
			}
			_ = ci
		}
		res.NullMax = nullTable(st, nulls)
		sum.NullCheck = nullCheck(st, nulls)
	}
	sum.Warnings = append(sum.Warnings, warn...)
	for ci, cs := range fr.contrasts {
		*res.tails[ci].order = cs.order // made on first use: kept for the next re-threshold
	}
	return res, nil
}

// Rethreshold infers a complete group result again under another method, alpha or
// cluster-forming p without running the permutations again, and returns the result a new
// run with those settings gives (the same summary, maps and null table; the run's seed and
// number of relabellings). method MethodDefault, alpha 0 and clusterP 0 keep r's settings.
// What can be done:
//
//   - the parametric methods (none, bonferroni, holm, fdr-bh, fdr-by, fwe-rft, cluster-rft),
//     at any alpha and cluster-forming p, from any result: they need only the statistic map;
//   - fwe-perm at any alpha from a run of any permutation method (each records the largest
//     statistic of every relabelling);
//   - tfce at any alpha from a tfce run (its null of the largest TFCE);
//   - cluster-perm at any alpha from a cluster-perm run at the same cluster-forming p.
//
// cluster-perm at another cluster-forming p needs the largest cluster of every relabelling
// at that p, and tfce or cluster-perm after a run that did not record them need their
// maxima: those, and any permutation method after a parametric run, are an error that says
// to run the analysis again. r itself is left as it is.
func (r *GroupResult) Rethreshold(method infer.Method, alpha, clusterP float64) (*GroupResult, error) {
	if r.IsShard() || r.ran == nil {
		return nil, errors.New("analysis: Rethreshold of a group shard; want a complete result")
	}
	ran := r.ran
	if method == infer.MethodDefault {
		method = r.state.Method
	}
	if alpha == 0 {
		alpha = r.state.Alpha
	}
	if clusterP == 0 {
		clusterP = r.state.ClusterP
	}
	if err := checkLevels(alpha, clusterP); err != nil {
		return nil, err
	}
	if !slices.Contains(infer.Methods(), method) {
		return nil, inputErrf("--correct", "%s is unknown; want one of %s", method, strings.Join(methodNames(), ", "))
	}
	again := func(why string) error {
		return inputErrf("--correct", "%s %s; run the group analysis again with these settings", method, why)
	}
	target := permMethod(method)
	if target {
		switch {
		case !permMethod(ran.Method):
			return nil, again(fmt.Sprintf("needs permutations, and this result was made with %s (no permutations)", ran.Method))
		case method == infer.MethodTFCE && ran.Method != infer.MethodTFCE:
			return nil, again(fmt.Sprintf("needs the largest TFCE of every relabelling, which the %s run did not record", ran.Method))
		case method == infer.MethodClusterPerm && ran.Method != infer.MethodClusterPerm:
			return nil, again(fmt.Sprintf("needs the largest cluster of every relabelling, which the %s run did not record", ran.Method))
		case method == infer.MethodClusterPerm && clusterP != ran.ClusterP:
			return nil, again(fmt.Sprintf("at cluster-forming p %g needs the largest cluster of every relabelling at that p; the run recorded them at p %g only", clusterP, ran.ClusterP))
		}
	}
	st := *ran
	st.Method, st.Alpha, st.ClusterP = method, alpha, clusterP
	st.Contrasts = make([]groupContrast, len(ran.Contrasts))
	for ci, gc := range ran.Contrasts {
		// As Group sets them for a run with these settings.
		if gc.F {
			gc.ClusterStat = dist.FFromLogSF(math.Log(clusterP), gc.DF1, gc.DF2)
		} else {
			gc.ClusterStat = dist.TFromLogSF(math.Log(clusterP), gc.DF1)
		}
		if method != infer.MethodTFCE {
			gc.TFCE = nil
		}
		st.Contrasts[ci] = gc
	}
	var nulls []groupNull
	if target {
		nulls = make([]groupNull, len(r.ranNulls))
		for ci, nl := range r.ranNulls {
			// Only the maxima a run of this method records.
			keep := groupNull{Lo: nl.Lo, Hi: nl.Hi, Stat: nl.Stat}
			switch method {
			case infer.MethodTFCE:
				keep.TFCE = nl.TFCE
			case infer.MethodClusterPerm:
				keep.Cluster = nl.Cluster
			}
			nulls[ci] = keep
		}
	}
	// The contrasts' statistics are ran's, as are their log p and z.
	out, err := finishGroupWith(&st, nulls, r.tails)
	if err != nil {
		return nil, err
	}
	out.ran, out.ranNulls = ran, r.ranNulls
	return out, nil
}

// methodNames are the spellings of every correction method.
func methodNames() []string {
	var names []string
	for _, m := range infer.Methods() {
		names = append(names, m.String())
	}
	return names
}

// permThreshold applies a permutation method to one contrast. It returns the corrected p per
// voxel and warnings.
func (r *FitResult) permThreshold(cs *contrastState, out *report.Contrast, gc *groupContrast, null groupNull, method infer.Method, alpha, clusterP float64, known *permPs) ([]float64, []string) {
	var warn []string
	m := len(cs.stat)
	cs.survive = make([]bool, m)
	out.Correction = method.String()
	out.Alpha = alpha
	out.Corrected = true
	out.ThresholdSource = method.String()
	out.StatThreshold, out.ZThreshold, out.ClusterP, out.ClusterExtent = nil, nil, nil, nil
	pcorr := make([]float64, m)
	if k := int(math.Floor(alpha*float64(gc.N) + 1e-9)); k < 1 {
		warn = append(warn, fmt.Sprintf("%s: %d relabellings cannot resolve alpha %g: the smallest p is 1/%d = %.3g, so nothing can pass; want at least %d", gc.Name, gc.N, alpha, gc.N, 1/float64(gc.N), int(math.Ceil(1/alpha))))
	}
	switch method {
	case infer.MethodFWEPerm, infer.MethodTFCE:
		vals, maxima := cs.stat, null.Stat
		if method == infer.MethodTFCE {
			vals, maxima = gc.TFCE, null.TFCE
		}
		d := group.NewDistribution(maxima)
		pcorr = known.get(permKey{method: method}, func() []float64 {
			for k, s := range vals {
				pcorr[k] = d.P(s)
			}
			return pcorr
		})
		for k, s := range vals {
			cs.survive[k] = pcorr[k] <= alpha && s > 0
		}
		if c, ok := d.Critical(alpha); ok {
			out.StatThreshold = ptr(c)
			if method == infer.MethodFWEPerm {
				out.ZThreshold = ptr(cs.zOf(c))
			}
		}
		r.fillClusters(cs, out, func(_ int, k int) *float64 { return ptr(pcorr[k]) })
	case infer.MethodClusterPerm:
		out.ClusterP = ptr(clusterP)
		out.ThresholdSource = "cluster-forming"
		u := gc.ClusterStat
		out.StatThreshold = ptr(u)
		out.ZThreshold = ptr(cs.zOf(u))
		d := group.NewDistribution(null.Cluster)
		if c, ok := d.Critical(alpha); ok {
			out.ClusterExtent = ptr(int(c) + 1)
		}
		// Observed clusters: the same float32 map and threshold as every relabelling.
		grid := make([]float32, r.Grid.Voxels())
		for k, v := range r.voxels {
			g := cs.stat[k]
			if cs.f {
				g = math.Sqrt(g)
			}
			grid[v] = float32(g)
		}
		thr := u
		if cs.f {
			thr = math.Sqrt(u)
		}
		above := make([]bool, len(grid))
		for v, g := range grid {
			above[v] = float64(g) >= thr
		}
		labels, sizes := clusterLabel(above, r.Grid.Dims)
		cp := make([]float64, len(sizes)+1)
		cp[0] = 1
		for l, s := range sizes {
			cp[l+1] = d.P(float64(s))
		}
		for k, v := range r.voxels {
			pcorr[k] = cp[labels[v]]
			cs.survive[k] = labels[v] > 0 && cp[labels[v]] <= alpha
		}
		r.fillClusters(cs, out, func(size, _ int) *float64 { return ptr(d.P(float64(size))) })
	}
	return pcorr, warn
}

// parametricP is the corrected p per voxel of a parametric method (uncorrected for none; the
// cluster's p for cluster-rft, 1 outside clusters).
func parametricP(r *FitResult, cs *contrastState, method infer.Method, alpha, clusterP float64) []float64 {
	m := len(cs.stat)
	p := make([]float64, m)
	switch method {
	case infer.MethodNone:
		for k, lp := range cs.logp {
			p[k] = math.Exp(lp)
		}
	case infer.MethodBonferroni, infer.MethodHolm, infer.MethodFDRBH, infer.MethodFDRBY:
		// Adjusted p do not depend on alpha: kept with the contrast for re-thresholds.
		for k, a := range cs.adjustedLogP(method) {
			p[k] = math.Exp(a)
		}
	case infer.MethodFWERFT:
		f := cs.field()
		rft := infer.PeakPs(r.resels, f, cs.stat)
		for k, s := range cs.stat {
			p[k] = math.Min(rft[k], infer.BonferroniP(f, m, s))
		}
	case infer.MethodClusterRFT:
		u := dist.ZFromLogSF(math.Log(clusterP))
		crft, err := infer.NewClusterRFT(r.resels, m, u)
		above := make([]bool, r.Grid.Voxels())
		for k, v := range r.voxels {
			above[v] = cs.z[k] >= u
		}
		labels, sizes := clusterLabel(above, r.Grid.Dims)
		for k, v := range r.voxels {
			p[k] = 1
			if l := labels[v]; l > 0 && err == nil {
				p[k] = crft.P(float64(sizes[l-1]))
			}
		}
	}
	for k := range p {
		if math.IsNaN(p[k]) {
			p[k] = 1
		}
	}
	return p
}

// nullTable lays out the null maxima: one row per relabelling, columns per contrast.
func nullTable(st *groupState, nulls []groupNull) *NullTable {
	t := &NullTable{Columns: []string{"perm"}}
	var cols [][]float64
	rows := 0
	for ci, gc := range st.Contrasts {
		nl := nulls[ci]
		sk := "t"
		if gc.F {
			sk = "F"
		}
		t.Columns = append(t.Columns, gc.Name+"_max_"+sk)
		cols = append(cols, nl.Stat)
		if nl.Cluster != nil {
			t.Columns = append(t.Columns, gc.Name+"_max_cluster_voxels")
			cols = append(cols, nl.Cluster)
		}
		if nl.TFCE != nil {
			t.Columns = append(t.Columns, gc.Name+"_max_tfce")
			cols = append(cols, nl.TFCE)
		}
		rows = max(rows, gc.N)
	}
	t.Rows = make([][]float64, rows)
	for j := range rows {
		row := make([]float64, len(cols)+1)
		row[0] = float64(j)
		for c, col := range cols {
			row[c+1] = math.NaN()
			if j < len(col) {
				row[c+1] = col[j]
			}
		}
		t.Rows[j] = row
	}
	return t
}

// nullCheck measures, on the first contrast's permutation null, how many relabellings would
// have had a finding at the run's threshold (methods j.3: at most ⌊α·N⌋ by construction),
// with the exact 95 % interval of the rate.
func nullCheck(st *groupState, nulls []groupNull) *report.NullCheck {
	gc, nl := st.Contrasts[0], nulls[0]
	var maxima []float64
	switch st.Method {
	case infer.MethodClusterPerm:
		maxima = nl.Cluster
	case infer.MethodTFCE:
		maxima = nl.TFCE
	default:
		maxima = nl.Stat
	}
	d := group.NewDistribution(maxima)
	found := 0
	if c, ok := d.Critical(st.Alpha); ok {
		found = d.Above(c)
	}
	lo, hi := dist.ClopperPearson(found, gc.N, 0.05)
	return &report.NullCheck{Designs: gc.N, WithFindings: found, FWEEstimate: float64(found) / float64(gc.N), CI95: [2]float64{lo, hi}}
}

// GroupDesign is a parsed group design table.
type GroupDesign struct {
	Names   []string
	Columns [][]float64 // Columns[c][row]
}

// Rows returns the number of subjects.
func (d *GroupDesign) Rows() int {
	if len(d.Columns) == 0 {
		return 0
	}
	return len(d.Columns[0])
}

// Matrix returns the design matrix, subjects × columns.
func (d *GroupDesign) Matrix() *mat.Dense {
	x := mat.NewDense(d.Rows(), len(d.Names), nil)
	for c, col := range d.Columns {
		for i, v := range col {
			x.Set(i, c, v)
		}
	}
	return x
}

// ParseGroupDesign reads a group design table: a header row of column names, then one row
// per map, tab-separated (or comma-separated when the header holds no tab). Rules (winnow's):
//
//   - A column whose every cell is a number is used as it is (covariates are not centred).
//   - A column named participant_id (the BIDS participants table's label column) is skipped.
//   - At most one column may hold text: its distinct values (in order of first appearance)
//     become 0/1 indicator columns named by the value, e.g. a column group with values
//     patient and control gives columns patient and control (contrast "patient - control").
//   - Unless a column is constant and non-zero, or a text column's indicators (which sum to
//     one) are present, a column "mean" of ones is added first, so that covariates and 0/1
//     regressors are adjusted for the overall mean.
//   - Empty and n/a cells are refused: every subject needs every value.
func ParseGroupDesign(r io.Reader) (*GroupDesign, error) {
	sc := bufio.NewScanner(r)
	sc.Buffer(make([]byte, 64*1024), 16*1024*1024)
	var lines []string
	for sc.Scan() {
		lines = append(lines, strings.TrimRight(sc.Text(), "\r"))
	}
	if err := sc.Err(); err != nil {
		return nil, err
	}
	for len(lines) > 0 && strings.TrimSpace(lines[len(lines)-1]) == "" {
		lines = lines[:len(lines)-1]
	}
	if len(lines) < 2 {
		return nil, errors.New("want a header row of column names and one row per map")
	}
	sep := "\t"
	if !strings.Contains(lines[0], "\t") && strings.Contains(lines[0], ",") {
		sep = ","
	}
	header := strings.Split(lines[0], sep)
	seen := map[string]bool{}
	for c, h := range header {
		h = strings.TrimSpace(h)
		header[c] = h
		if h == "" {
			return nil, fmt.Errorf("line 1, column %d: empty column name; want a name", c+1)
		}
		if seen[h] {
			return nil, fmt.Errorf("line 1: column name %q appears twice; want distinct names", h)
		}
		seen[h] = true
	}
	cells := make([][]string, len(header))
	for li, line := range lines[1:] {
		f := strings.Split(line, sep)
		if len(f) != len(header) {
			return nil, fmt.Errorf("line %d: %d cells, want %d (one per header column)", li+2, len(f), len(header))
		}
		for c := range f {
			cells[c] = append(cells[c], strings.TrimSpace(f[c]))
		}
	}
	d := &GroupDesign{}
	hasConst, textCols := false, 0
	for c, name := range header {
		if name == "participant_id" {
			continue
		}
		vals := make([]float64, len(cells[c]))
		numeric := true
		for i, s := range cells[c] {
			if s == "" || s == "n/a" {
				return nil, fmt.Errorf("line %d, column %q: missing value; want a value for every map", i+2, name)
			}
			v, err := strconv.ParseFloat(s, 64)
			if err != nil {
				numeric = false
				break
			}
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return nil, fmt.Errorf("line %d, column %q: %q is not a finite number", i+2, name, s)
			}
			vals[i] = v
		}
		if numeric {
			d.Names = append(d.Names, name)
			d.Columns = append(d.Columns, vals)
			if vals[0] != 0 && allEqual(vals) {
				hasConst = true
			}
			continue
		}
		textCols++
		if textCols > 1 {
			return nil, fmt.Errorf("column %q: a second text column; want at most one (code further factors as 0/1 numbers)", name)
		}
		var levels []string
		idx := map[string]int{}
		for _, s := range cells[c] {
			if _, ok := idx[s]; !ok {
				idx[s] = len(levels)
				levels = append(levels, s)
			}
		}
		for l, lev := range levels {
			if seen[lev] && lev != name {
				return nil, fmt.Errorf("column %q: level %q is also a column name; want distinct names", name, lev)
			}
			col := make([]float64, len(cells[c]))
			for i, s := range cells[c] {
				if idx[s] == l {
					col[i] = 1
				}
			}
			d.Names = append(d.Names, lev)
			d.Columns = append(d.Columns, col)
		}
		hasConst = true
	}
	if len(d.Names) == 0 {
		return nil, errors.New("no design column (participant_id is a label); want at least one column")
	}
	if !hasConst {
		if seen["mean"] {
			return nil, errors.New(`no constant column, and "mean" is taken; want a column of ones, or rename "mean"`)
		}
		ones := make([]float64, d.Rows())
		for i := range ones {
			ones[i] = 1
		}
		d.Names = append([]string{"mean"}, d.Names...)
		d.Columns = append([][]float64{ones}, d.Columns...)
	}
	return d, nil
}

func allEqual(x []float64) bool {
	for _, v := range x {
		if v != x[0] {
			return false
		}
	}
	return true
}

func clusterLabel(in []bool, dims [3]int) ([]int32, []int) {
	return cluster.Label(in, dims, cluster.Corners)
}

// Shard files: a shard writes its state and null slice (gob, gzip) and a small JSON note;
// merge reads them back.
const (
	shardStateFile = "group_shard.gob.gz"
	shardNoteFile  = "shard.json"
	shardFormat    = 1
)

type shardFile struct {
	Format      int
	Shard       int
	Shards      int
	Fingerprint string // sha256 of the gob-encoded state: shards of one run share it
	State       []byte // gob-encoded groupState
	Nulls       []groupNull
}

// IsShard reports whether the result is one shard of a sharded run.
func (r *GroupResult) IsShard() bool { return r.shard > 0 }

// ShardRange returns, for a shard, the relabellings it did (of the first contrast).
func (r *GroupResult) ShardRange() (lo, hi, n int) {
	if len(r.nulls) == 0 {
		return 0, 0, 0
	}
	return r.nulls[0].Lo, r.nulls[0].Hi, r.state.Contrasts[0].N
}

// WriteDir writes the outputs into dir: per contrast the statistic, z, effect, thresholded and
// corrected-p maps (and TFCE under tfce), null_max.tsv under permutation methods, design.tsv
// and summary.json, each under a temporary name renamed when complete, summary.json last. A
// shard writes group_shard.gob.gz and shard.json instead, for MergeGroup.
func (r *GroupResult) WriteDir(dir string) error {
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return err
	}
	if err := os.Remove(filepath.Join(dir, "summary.json")); err != nil && !os.IsNotExist(err) {
		return err
	}
	if r.IsShard() {
		b, fp, err := encodeState(r.state)
		if err != nil {
			return err
		}
		sf := shardFile{Format: shardFormat, Shard: r.shard, Shards: r.state.Shards, Fingerprint: fp, State: b, Nulls: r.nulls}
		err = writeAtomic(filepath.Join(dir, shardStateFile), func(w io.Writer) error {
			zw := gzip.NewWriter(w)
			if err := gob.NewEncoder(zw).Encode(&sf); err != nil {
				return err
			}
			return zw.Close()
		})
		if err != nil {
			return err
		}
		lo, hi, n := r.ShardRange()
		note := map[string]any{"shard": r.shard, "shards": r.state.Shards, "perms_from": lo, "perms_to": hi, "perms_total": n, "fingerprint": fp}
		return writeAtomic(filepath.Join(dir, shardNoteFile), func(w io.Writer) error {
			enc := json.NewEncoder(w)
			enc.SetIndent("", "  ")
			return enc.Encode(note)
		})
	}
	for _, m := range r.Maps {
		err := writeAtomic(filepath.Join(dir, m.File), func(w io.Writer) error {
			return nifti.WriteMap(w, r.Grid, m.Data, m.Write)
		})
		if err != nil {
			return err
		}
	}
	if r.NullMax != nil {
		if err := writeAtomic(filepath.Join(dir, "null_max.tsv"), r.NullMax.WriteTSV); err != nil {
			return err
		}
	}
	if err := writeAtomic(filepath.Join(dir, "design.tsv"), r.Design.WriteTSV); err != nil {
		return err
	}
	return writeAtomic(filepath.Join(dir, "summary.json"), r.WriteSummary)
}

// WriteSummary writes the summary as indented JSON.
func (r *GroupResult) WriteSummary(w io.Writer) error {
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	return enc.Encode(r.Summary)
}

// WriteTSV writes the table: a header row, then one row per relabelling, numbers in the
// shortest form that reads back to the same float64, n/a for a missing value.
func (t *NullTable) WriteTSV(w io.Writer) error {
	bw := bufio.NewWriter(w)
	bw.WriteString(strings.Join(t.Columns, "\t"))
	bw.WriteByte('\n')
	for _, row := range t.Rows {
		for c, v := range row {
			if c > 0 {
				bw.WriteByte('\t')
			}
			if math.IsNaN(v) {
				bw.WriteString("n/a")
			} else {
				bw.WriteString(strconv.FormatFloat(v, 'g', -1, 64))
			}
		}
		bw.WriteByte('\n')
	}
	return bw.Flush()
}

func encodeState(st *groupState) ([]byte, string, error) {
	// Room for the encoding at the outset (gob takes at most 9 bytes per float64 and 5 per
	// int32): the buffer does not grow by doubling, which in a page worker, whose memory
	// never shrinks, would raise the peak.
	size := 4096 + 5*len(st.Voxels) + 9*len(st.DesignX)
	for _, gc := range st.Contrasts {
		size += 9 * (len(gc.Stat) + len(gc.Effect) + len(gc.TFCE))
	}
	var buf bytes.Buffer
	buf.Grow(size)
	if err := gob.NewEncoder(&buf).Encode(st); err != nil {
		return nil, "", err
	}
	h := sha256.Sum256(buf.Bytes())
	return buf.Bytes(), hex.EncodeToString(h[:]), nil
}

// MergeGroup joins the shard folders of one sharded group run (every shard K/N of the same
// inputs and settings, each once) into the result one run gives.
func MergeGroup(dirs []string) (*GroupResult, error) {
	if len(dirs) == 0 {
		return nil, inputErrf("merge", "no shard folder given; want the folders of shards 1/N to N/N")
	}
	shards := make([]namedShard, len(dirs))
	for i, dir := range dirs {
		name := filepath.Join(dir, shardStateFile)
		sf, err := readShard(name)
		if err != nil {
			return nil, err
		}
		shards[i] = namedShard{name, sf}
	}
	return joinShards(shards, " from "+shards[0].name)
}

// namedShard is a decoded shard and the name its error messages give it.
type namedShard struct {
	name string
	sf   *shardFile
}

// joinShards checks that the shards (at least one, checked by readShard or
// decodeShard) are every shard of one run, each once, and finishes the run
// from the first one's state and all their nulls, exactly as one run does.
// ref follows "differ" in the message about a shard of another run.
func joinShards(shards []namedShard, ref string) (*GroupResult, error) {
	first := shards[0]
	st := &groupState{}
	if err := gob.NewDecoder(bytes.NewReader(first.sf.State)).Decode(st); err != nil {
		return nil, inputErrf(first.name, "unreadable shard state: %v", err)
	}
	if len(st.Contrasts) == 0 {
		return nil, inputErrf(first.name, "shard state holds no contrast")
	}
	fp, n := first.sf.Fingerprint, first.sf.Shards
	byShard := map[int]*shardFile{}
	for i, s := range shards {
		sf := s.sf
		if i > 0 {
			h := sha256.Sum256(sf.State)
			if sf.Fingerprint != fp || hex.EncodeToString(h[:]) != fp || sf.Shards != n {
				return nil, inputErrf(s.name, "belongs to a different run (inputs, settings or shard count differ%s); want the shards of one run", ref)
			}
		}
		if byShard[sf.Shard] != nil {
			return nil, inputErrf(s.name, "shard %d/%d given twice; want each shard once", sf.Shard, sf.Shards)
		}
		if len(sf.Nulls) != len(st.Contrasts) {
			return nil, inputErrf(s.name, "holds %d null slices, want %d (one per contrast)", len(sf.Nulls), len(st.Contrasts))
		}
		byShard[sf.Shard] = sf
	}
	var missing []string
	for k := 1; k <= n; k++ {
		if byShard[k] == nil {
			missing = append(missing, fmt.Sprintf("%d/%d", k, n))
		}
	}
	if len(missing) > 0 {
		return nil, inputErrf("merge", "shard(s) %s missing; want all %d shards of the run", strings.Join(missing, ", "), n)
	}
	nulls := make([]groupNull, len(st.Contrasts))
	for ci, gc := range st.Contrasts {
		nl := groupNull{Lo: 0, Hi: gc.N}
		for k := 1; k <= n; k++ {
			part := byShard[k].Nulls[ci]
			if lo, hi := sliceOf(gc.N, k, n); part.Lo != lo || part.Hi != hi || (part.Stat != nil && len(part.Stat) != hi-lo) {
				return nil, inputErrf("merge", "shard %d/%d covers relabellings %d..%d, want %d..%d", k, n, part.Lo, part.Hi, lo, hi)
			}
			nl.Stat = append(nl.Stat, part.Stat...)
			nl.Cluster = append(nl.Cluster, part.Cluster...)
			nl.TFCE = append(nl.TFCE, part.TFCE...)
		}
		nulls[ci] = nl
	}
	st.Shards = 0
	return finishGroup(st, nulls)
}

func readShard(name string) (*shardFile, error) {
	f, err := os.Open(name)
	if err != nil {
		return nil, inputErrf(name, "%v; want the folder of a shard written by group --shard K/N", errors.Unwrap(err))
	}
	defer f.Close()
	zr, err := gzip.NewReader(f)
	if err != nil {
		return nil, inputErr(name, err)
	}
	return decodeShard(zr, name, "unreadable shard file")
}

// decodeShard reads one gob-encoded shard and checks its format and K/N;
// unreadable begins the message of a decoding error.
func decodeShard(r io.Reader, name, unreadable string) (*shardFile, error) {
	var sf shardFile
	if err := gob.NewDecoder(r).Decode(&sf); err != nil {
		return nil, inputErrf(name, "%s: %v", unreadable, err)
	}
	if sf.Format != shardFormat {
		return nil, inputErrf(name, "shard format %d, want %d", sf.Format, shardFormat)
	}
	if sf.Shards < 1 || sf.Shard < 1 || sf.Shard > sf.Shards {
		return nil, inputErrf(name, "shard %d/%d; want K/N with 1 <= K <= N", sf.Shard, sf.Shards)
	}
	return &sf, nil
}
