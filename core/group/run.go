package group

import (
	"context"
	"fmt"
	"math"
	"runtime"
	"sync"
	"sync/atomic"

	"winnow/core/cluster"
)

// TFCE parameters (Smith & Nichols 2009; methods notes §k).
const (
	TFCEE = 0.5
	TFCEH = 2.0
)

// TieTol is the relative tolerance of "T*_j ≥ T": T*_j counts when T*_j ≥ T − TieTol·|T|.
const TieTol = 1e-10

// Stats selects the maxima recorded per relabelling.
type Stats uint8

const (
	MaxStat    Stats = 1 << iota // the largest statistic (t or F)
	MaxCluster                   // the largest 26-connected cluster of {stat ≥ threshold}, voxels
	MaxTFCE                      // the largest TFCE (of t, or of √F)
)

// Space places the analysed voxels on their grid.
type Space struct {
	Dims   [3]int
	Voxels []int32 // in-mask linear indices, ascending
}

// Problem is a model applied to data: the reduced-model residuals and the sums every
// relabelling shares.
type Problem struct {
	M     *Model
	Space Space
	v     int
	// The N×V residuals of the reduced model (the data when Z is empty): rz, or rz32 when the
	// data were given as float32 and Z is empty (PrepareFloat32), read as float64 — the same
	// values, in half the memory.
	rz   []float64
	rz32 []float32
	ss   []float64 // per voxel Σ_i rz_i²
	m0   []float64 // per voxel, the invariant coordinate (u_0'rz) when M.invariant
	// ascending: Space.Voxels increase strictly (as documented), so a relabelling's voxels
	// with t > 0 can go to the TFCE as a sparse list in index order.
	ascending bool
}

// Prepare applies the model to data y (N×V row-major: subject i's values at y[i*V:(i+1)*V],
// V = len(sp.Voxels)). y is not modified or kept.
func (m *Model) Prepare(y []float64, sp Space) *Problem {
	p := m.newProblem(len(y), sp)
	if m.resid == nil {
		p.rz = make([]float64, len(y))
		copy(p.rz, y)
	} else {
		p.rz = reduce(m, y, p.v)
	}
	p.sums()
	return p
}

// PrepareFloat32 is Prepare for float32 data: the problem and its results are those of
// Prepare on the same values as float64. Without a reduced model (Z empty: the model's
// residuals are the data) the problem keeps y as its data instead of copying it, so y must not
// change while the problem is in use; otherwise y is not kept.
func (m *Model) PrepareFloat32(y []float32, sp Space) *Problem {
	p := m.newProblem(len(y), sp)
	if m.resid == nil {
		p.rz32 = y
	} else {
		p.rz = reduce(m, y, p.v)
	}
	p.sums()
	return p
}

func (m *Model) newProblem(ny int, sp Space) *Problem {
	v := len(sp.Voxels)
	if ny != m.N*v {
		panic(fmt.Sprintf("group: data has %d values, want %d subjects × %d voxels", ny, m.N, v))
	}
	p := &Problem{M: m, Space: sp, v: v}
	p.ascending = true
	for k := 1; k < v; k++ {
		if sp.Voxels[k] <= sp.Voxels[k-1] {
			p.ascending = false
			break
		}
	}
	return p
}

// reduce returns the reduced-model residuals (I − P_Z) y, N×V.
func reduce[T float](m *Model, y []T, v int) []float64 {
	n := m.N
	rz := make([]float64, n*v)
	for i := range n {
		dst := rz[i*v : (i+1)*v]
		for l := range n {
			axpyOf(dst, m.resid[i*n+l], y[l*v:(l+1)*v])
		}
	}
	return rz
}

// sums computes ss and m0 from the residuals.
func (p *Problem) sums() {
	if p.rz32 != nil {
		sumsOf(p, p.rz32)
	} else {
		sumsOf(p, p.rz)
	}
}

func sumsOf[T float](p *Problem, rz []T) {
	m, n, v := p.M, p.M.N, p.v
	p.ss = make([]float64, v)
	for i := range n {
		row := rz[i*v : (i+1)*v]
		for k, x := range row {
			p.ss[k] += float64(x) * float64(x)
		}
	}
	if m.invariant {
		p.m0 = make([]float64, v)
		for i := range n {
			axpyOf(p.m0, m.u[i*m.r], rz[i*v:(i+1)*v])
		}
	}
}

// float is the element type of the residuals: float64, or float32 data read as float64.
type float interface{ float32 | float64 }

func axpy(dst []float64, a float64, x []float64) {
	x = x[:len(dst)]
	for k := range dst {
		dst[k] += a * x[k]
	}
}

// axpyOf is axpy for either element type of the residuals.
func axpyOf[T float](dst []float64, a float64, x []T) {
	x = x[:len(dst)]
	for k := range dst {
		dst[k] += a * float64(x[k])
	}
}

// Options set what Run records.
type Options struct {
	Stats   Stats
	Cluster float64 // cluster-forming threshold on the statistic's scale (t, or F), for MaxCluster
	Workers int     // 0: runtime.NumCPU()
	// Block is the most relabellings a worker computes together (0: the default, 32 under
	// sign flips, 8 otherwise). Results do not depend on it; a sign-flip block shares its
	// pattern tables (faster with more), while TFCE without clusters holds each relabelling's
	// voxels > 0 until the block's end (5 bytes per such voxel: about 2.5·V bytes per
	// relabelling).
	Block int
	// Exceed, with Observed set, counts per voxel the relabellings whose statistic reaches the
	// observed one (for uncorrected permutation p-values).
	Exceed   bool
	Observed *Observed
	Progress func(done, total int) // called from one goroutine at a time
}

// Observed is the identity's result: the maps the permutation maxima are compared with.
type Observed struct {
	Stat   []float64   // per voxel: t or F
	Effect [][]float64 // per contrast row, per voxel: Cβ̂
	Grid   []float32   // full grid: t (or √F) in the mask, 0 elsewhere: the map TFCE and clusters see
	TFCE   []float64   // full grid, when MaxTFCE
	Max    Maxima      // the identity's maxima
}

// Maxima are the recorded maxima of one relabelling.
type Maxima struct {
	Stat, Cluster, TFCE float64
}

// Null holds the maxima of relabellings Lo..Hi−1.
type Null struct {
	Lo, Hi  int
	Stat    []float64 // MaxStat
	Cluster []float64 // MaxCluster
	TFCE    []float64 // MaxTFCE
	Exceed  []int64   // per voxel, with Options.Exceed
}

// Observe computes the identity's statistic, effect and (with MaxTFCE) TFCE maps through the
// same arithmetic as every relabelling.
func (p *Problem) Observe(pl *Plan, opt Options) *Observed {
	w := p.newWorker(1, opt)
	obs := &Observed{}
	w.keep = obs
	id := pl.NewRelabelling()
	pl.At(pl.IdentityIndex(), id)
	w.block([]Relabelling{id})
	obs.Max = w.max[0]
	return obs
}

// Run computes the maxima of relabellings lo..hi−1 of plan pl on opt.Workers goroutines.
// The result does not depend on the number of workers.
func (p *Problem) Run(ctx context.Context, pl *Plan, lo, hi int, opt Options) (*Null, error) {
	if lo < 0 || hi > pl.N || lo > hi {
		panic(fmt.Sprintf("group: relabellings %d..%d of %d", lo, hi, pl.N))
	}
	if opt.Exceed && opt.Observed == nil {
		panic("group: Exceed needs Observed")
	}
	nw := opt.Workers
	if nw <= 0 {
		nw = runtime.NumCPU()
	}
	// Relabellings per block: sign flips share their pattern tables across the block, so a
	// larger block divides that cost further (see flipSums).
	blockSize := 8
	if p.M.Scheme == SignFlips {
		blockSize = flipBlock
	}
	if opt.Block > 0 {
		blockSize = opt.Block
	}
	nb := (hi - lo + blockSize - 1) / blockSize
	nw = max(1, min(nw, nb))
	null := &Null{Lo: lo, Hi: hi}
	if opt.Stats&MaxStat != 0 {
		null.Stat = make([]float64, hi-lo)
	}
	if opt.Stats&MaxCluster != 0 {
		null.Cluster = make([]float64, hi-lo)
	}
	if opt.Stats&MaxTFCE != 0 {
		null.TFCE = make([]float64, hi-lo)
	}
	var next, done atomic.Int64
	var mu sync.Mutex
	var wg sync.WaitGroup
	workers := make([]*worker, nw)
	for wi := range nw {
		w := p.newWorker(blockSize, opt)
		workers[wi] = w
		wg.Add(1)
		go func() {
			defer wg.Done()
			labs := make([]Relabelling, blockSize)
			for b := range labs {
				labs[b] = pl.NewRelabelling()
			}
			for {
				b := int(next.Add(1) - 1)
				if b >= nb || ctx.Err() != nil {
					return
				}
				j0 := lo + b*blockSize
				j1 := min(hi, j0+blockSize)
				for j := j0; j < j1; j++ {
					pl.At(j, labs[j-j0])
				}
				w.block(labs[:j1-j0])
				for j := j0; j < j1; j++ {
					mx := w.max[j-j0]
					if null.Stat != nil {
						null.Stat[j-lo] = mx.Stat
					}
					if null.Cluster != nil {
						null.Cluster[j-lo] = mx.Cluster
					}
					if null.TFCE != nil {
						null.TFCE[j-lo] = mx.TFCE
					}
				}
				d := int(done.Add(int64(j1 - j0)))
				if opt.Progress != nil {
					mu.Lock()
					opt.Progress(d, hi-lo)
					mu.Unlock()
				}
			}
		}()
	}
	wg.Wait()
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	if opt.Exceed {
		null.Exceed = make([]int64, p.v)
		for _, w := range workers {
			for k, c := range w.exceed {
				null.Exceed[k] += c
			}
		}
	}
	return null, nil
}

// worker holds the buffers of one goroutine.
type worker struct {
	p     *Problem
	opt   Options
	nb    int       // relabellings per block
	rows  int       // coordinates of m computed per relabelling (r, or r − 1 with the invariant)
	coef  []float64 // nb·rows × N coefficients
	out   []float64 // nb·rows × chunk
	mm    []float64 // chunk: |m|²
	st    []float64 // chunk: the statistic
	num   []float64 // Q × chunk: statistic numerators
	grids [][]float32
	// With sparse, a relabelling's grid is its voxels with t > 0 alone, in index order:
	// sval their values, spos their places within their flipSub voxels and scnt how many
	// there are in each flipSub voxels (5 bytes a voxel, held for the whole block; see
	// flipT), from which sidx, shared, takes their grid indices for the TFCE.
	sparse bool
	sval   [][]float32
	spos   [][]uint8
	scnt   [][]uint16
	sidx   []int32
	tfce   *cluster.TFCEWorkspace
	inBuf  []bool
	max    []Maxima
	exceed []int64
	keep   *Observed
	tol    []float64 // per voxel, observed − TieTol·|observed| (Exceed)
	noSkip bool      // compute every voxel's statistic (see skipOK)
	full   *worker   // made on first use by fullMaxStat
	pos    []int32   // flipSub: positions of the voxels computed (flipT)
	conv   []float64 // N × flipSub: float32 data as float64 (flipTables)

	// Sign flips: per group of up to flipGroup subjects, a table of the partial sums of every
	// sign pattern (see flipSums).
	flips bool
	ngrp  int       // subject groups
	tab   []float64 // rows × ngrp × 2^flipGroup × flipSub partial sums
	pat   []uint8   // nb × ngrp: sign pattern of each relabelling in each group
}

// flipGroup is the number of subjects per sign-pattern table and flipSub the voxels per table
// pass (rows·groups·16·flipSub·8 bytes stay within a core's cache for small designs).
const (
	flipGroup = 4
	flipSub   = 256
	flipBlock = 32
)

const chunk = 2048

// A voxel's place within its flipSub voxels is a uint8 (spos); chunks hold whole flipSubs.
const _ = uint8(flipSub-1) + uint8(chunk%flipSub)

func (p *Problem) newWorker(nb int, opt Options) *worker {
	m := p.M
	rows := m.r
	if m.invariant {
		rows--
	}
	w := &worker{p: p, opt: opt, nb: nb, rows: rows}
	if m.Scheme == SignFlips {
		w.flips = true
		w.ngrp = (m.N + flipGroup - 1) / flipGroup
		w.tab = make([]float64, rows*w.ngrp*(1<<flipGroup)*flipSub)
		w.pat = make([]uint8, nb*w.ngrp)
	}
	w.coef = make([]float64, nb*rows*m.N)
	w.out = make([]float64, nb*rows*chunk)
	w.mm = make([]float64, chunk)
	w.st = make([]float64, chunk)
	w.pos = make([]int32, flipSub)
	nk := 1
	if m.F {
		nk = m.Q
	}
	w.num = make([]float64, nk*chunk)
	w.max = make([]Maxima, nb)
	nvox := p.Space.Dims[0] * p.Space.Dims[1] * p.Space.Dims[2]
	// A one-coordinate t under sign flips with the TFCE maximum alone (besides the statistic)
	// hands the TFCE its voxels > 0 as lists instead of a grid: the statistics of voxels ≤ 0
	// are skipped there (see skipOK), and the TFCE reads no empty voxels.
	simpleT := !m.F && !m.invariant && rows == 1
	w.sparse = w.flips && simpleT && p.ascending && opt.Stats&MaxTFCE != 0 &&
		opt.Stats&MaxCluster == 0 && !(opt.Exceed && opt.Observed != nil)
	switch {
	case w.sparse:
		// The lists are made on first use (the observed map's worker uses none).
		w.sval, w.spos, w.scnt = make([][]float32, nb), make([][]uint8, nb), make([][]uint16, nb)
	case opt.Stats&(MaxCluster|MaxTFCE) != 0:
		w.grids = make([][]float32, nb)
		for b := range w.grids {
			w.grids[b] = make([]float32, nvox)
		}
	}
	if opt.Stats&MaxTFCE != 0 {
		w.tfce = cluster.NewTFCEWorkspace(p.Space.Dims, cluster.Corners)
	}
	if opt.Stats&MaxCluster != 0 {
		w.inBuf = make([]bool, nvox)
	}
	if opt.Exceed && opt.Observed != nil {
		w.exceed = make([]int64, p.v)
		w.tol = make([]float64, p.v)
		for k, t := range opt.Observed.Stat {
			w.tol[k] = t - TieTol*math.Abs(t)
		}
	}
	return w
}

// block computes the maxima of a block of relabellings.
func (w *worker) block(labs []Relabelling) {
	p, m := w.p, w.p.M
	n, r, rows := m.N, m.r, w.rows
	k0 := r - rows // first computed coordinate
	nb := len(labs)
	for b, lab := range labs {
		for kk := range rows {
			k := k0 + kk
			c := w.coef[(b*rows+kk)*n : (b*rows+kk+1)*n]
			if lab.Signs != nil {
				for i := range n {
					c[i] = lab.Signs[i] * m.u[i*r+k]
				}
			} else {
				for i := range n {
					c[i] = m.u[m.rep[lab.Class[i]]*r+k]
				}
			}
		}
		w.max[b] = Maxima{Stat: math.Inf(-1)}
		if w.flips {
			// Bit j of group g's pattern is set when subject flipGroup·g + j is negated.
			for g := range w.ngrp {
				var pt uint8
				for j := range flipGroup {
					if i := flipGroup*g + j; i < n && lab.Signs[i] < 0 {
						pt |= 1 << j
					}
				}
				w.pat[b*w.ngrp+g] = pt
			}
		}
	}
	keep := w.keep
	if keep != nil {
		keep.Stat = make([]float64, p.v)
		keep.Effect = make([][]float64, m.rows)
		for l := range keep.Effect {
			keep.Effect[l] = make([]float64, p.v)
		}
	}
	needGrid := w.grids != nil || keep != nil
	sqrtF := m.F
	nu := m.DF
	vox := p.Space.Voxels
	simpleT := !m.F && !m.invariant && rows == 1
	// Sign flips of a one-coordinate t (a one-column design: the one-sample test) take one
	// fused pass per voxel chunk; see flipT.
	fused := w.flips && simpleT && keep == nil
	skip := fused && w.skipOK()
	sparse := w.sparse && skip
	if sparse {
		for b := range nb {
			if w.sval[b] == nil {
				w.sval[b] = make([]float32, 0, p.v/2+1)
				w.spos[b] = make([]uint8, 0, p.v/2+1)
				w.scnt[b] = make([]uint16, (p.v+flipSub-1)/flipSub)
			}
			w.sval[b], w.spos[b] = w.sval[b][:0], w.spos[b][:0]
		}
	}
	for c0 := 0; c0 < p.v && fused; c0 += chunk {
		w.flipT(nb, c0, min(p.v, c0+chunk)-c0, skip, sparse)
	}
	for c0 := 0; c0 < p.v && !fused; c0 += chunk {
		c1 := min(p.v, c0+chunk)
		cl := c1 - c0
		// m coordinates: out[b, kk] = Σ_i coef[b, kk, i] rz[i, c0:c1].
		if w.flips {
			w.flipSums(nb, c0, cl)
		} else {
			for row := range nb * rows {
				o := w.out[row*chunk : row*chunk+cl]
				clear(o)
				if p.rz32 != nil {
					dotRows(o, w.coef[row*n:(row+1)*n], p.rz32, p.v, c0)
				} else {
					dotRows(o, w.coef[row*n:(row+1)*n], p.rz, p.v, c0)
				}
			}
		}
		ss := p.ss[c0:c1]
		for b := range nb {
			st := w.st[:cl]
			if simpleT {
				// One coordinate, t contrast: the general loops below in one pass, with the
				// same arithmetic (num = k·m, rss = SS − m²).
				o := w.out[b*chunk : b*chunk+cl]
				kc := m.k[k0]
				ss := ss[:len(o)]
				st := st[:len(o)]
				mx := w.max[b].Stat
				for v, x := range o {
					rss := ss[v] - x*x
					t := 0.0
					if rss > 1e-12*ss[v] {
						t = kc * x / math.Sqrt(rss/nu)
					}
					st[v] = t
					if t > mx {
						mx = t
					}
				}
				w.max[b].Stat = mx
			} else {
				w.stat(b, c0, cl)
			}
			if needGrid {
				grid := keepOr(keep, w.grids, b, p.Space.Dims)
				vx := vox[c0:c1]
				if sqrtF {
					for v, t := range st {
						grid[vx[v]] = float32(math.Sqrt(t))
					}
				} else {
					for v, t := range st {
						grid[vx[v]] = float32(t)
					}
				}
			}
			if keep != nil {
				copy(keep.Stat[c0:c1], st)
			}
			if w.exceed != nil {
				ex, tol := w.exceed[c0:c1], w.tol[c0:c1]
				for v, t := range st {
					if t >= tol[v] {
						ex[v]++
					}
				}
			}
			if keep != nil {
				// Effects: Cβ̂ = G m.
				for l := range m.rows {
					e := keep.Effect[l][c0:c1]
					if m.invariant {
						axpy(e, m.g[l*r], p.m0[c0:c1])
					}
					for kk := range rows {
						axpy(e, m.g[l*r+k0+kk], w.out[(b*rows+kk)*chunk:(b*rows+kk)*chunk+cl])
					}
				}
			}
		}
	}
	for b := range nb {
		var grid []float32
		if needGrid {
			grid = keepOr(keep, w.grids, b, p.Space.Dims)
		}
		if w.opt.Stats&MaxCluster != 0 {
			thr := w.opt.Cluster
			if sqrtF {
				thr = math.Sqrt(thr)
			}
			in := w.inBuf
			for i, g := range grid {
				in[i] = float64(g) >= thr
			}
			_, sizes := cluster.Label(in, p.Space.Dims, cluster.Corners)
			best := 0
			for _, s := range sizes {
				best = max(best, s)
			}
			w.max[b].Cluster = float64(best)
		}
		if w.opt.Stats&MaxTFCE != 0 {
			// The maximum alone (no map): every relabelling, the identity included, takes it
			// through the same arithmetic, so the identity's maximum is the observed one.
			if sparse {
				w.max[b].TFCE = cluster.TFCEMaxSparse(w.tfce, w.sparseIndices(b), w.sval[b], TFCEE, TFCEH)
			} else {
				w.max[b].TFCE = cluster.TFCEMaxTail(w.tfce, grid, TFCEE, TFCEH, cluster.TailPositive)
			}
			if keep != nil {
				keep.TFCE = make([]float64, len(grid))
				cluster.TFCETo(w.tfce, keep.TFCE, grid, TFCEE, TFCEH, cluster.TailPositive)
			}
		}
	}
	if skip && w.opt.Stats&MaxStat != 0 {
		for b, lab := range labs {
			if !(w.max[b].Stat > 0) {
				w.max[b].Stat = w.fullMaxStat(lab)
			}
		}
	}
}

// sparseIndices returns the grid indices of relabelling b's listed voxels (in w.sidx).
func (w *worker) sparseIndices(b int) []int32 {
	vox := w.p.Space.Voxels
	idx := w.sidx[:0]
	sp := w.spos[b]
	k := 0
	for s, c := range w.scnt[b] {
		base := s * flipSub
		for _, q := range sp[k : k+int(c)] {
			idx = append(idx, vox[base+int(q)])
		}
		k += int(c)
	}
	w.sidx = idx
	return idx
}

// skipOK reports whether relabellings may leave out the statistic of voxels where it is ≤ 0
// (written as 0 to the grid): true when nothing but the maxima are asked for (no Observed map,
// no per-voxel exceedance counts) and no grid reader looks at values ≤ 0 — the positive TFCE
// ignores them and a cluster threshold > 0 excludes them. A maximum statistic ≤ 0 is then
// recomputed in full (fullMaxStat).
func (w *worker) skipOK() bool {
	return w.keep == nil && w.exceed == nil && !w.noSkip &&
		(w.opt.Stats&MaxCluster == 0 || w.opt.Cluster > 0)
}

// fullMaxStat returns the maximum statistic of one relabelling with every voxel computed, in
// a block of its own (the arithmetic of a relabelling does not depend on its block): the
// maximum of a relabelling whose statistics are all ≤ 0.
func (w *worker) fullMaxStat(lab Relabelling) float64 {
	if w.full == nil {
		w.full = w.p.newWorker(1, Options{Stats: MaxStat})
		w.full.noSkip = true
	}
	w.full.block([]Relabelling{lab})
	return w.full.max[0].Stat
}

// flipT computes the statistics of the block's sign flips for voxels c0..c0+cl of a
// one-coordinate t contrast (the coordinate sums of flipSums, t = k·m / sqrt((SS − m²)/ν)),
// flipSub voxels at a time: the pattern tables, then per relabelling its sums, its statistics,
// its maximum, its grid values and exceedances, while they are in cache. With skip, a voxel
// whose numerator k·m is not > 0 (so t ≤ 0) gets 0 in the grid without the division and the
// square root; its statistic does not enter the maximum (see skipOK). With sparse (and skip)
// the voxels whose float32 t is > 0 — those the TFCE sweeps — are appended to the
// relabelling's lists instead of a grid.
func (w *worker) flipT(nb, c0, cl int, skip, sparse bool) {
	p, m := w.p, w.p.M
	kc := m.k[m.r-1]
	nu := m.DF
	for s0 := 0; s0 < cl; s0 += flipSub {
		sl := min(flipSub, cl-s0)
		v0 := c0 + s0
		w.flipTables(0, v0, sl)
		ss := p.ss[v0 : v0+sl]
		vx := p.Space.Voxels[v0 : v0+sl]
		for b := range nb {
			o := w.out[b*chunk+s0 : b*chunk+s0+sl]
			w.flipSum(o, b, 0)
			ss := ss[:len(o)]
			vx := vx[:len(o)]
			var grid []float32
			if w.grids != nil {
				grid = w.grids[b]
			}
			mx := w.max[b].Stat
			switch {
			case sparse:
				// The voxels with k·m > 0 are listed first, without a branch on the sign
				// (which changes every few voxels), then only they are computed.
				pos := w.pos[:len(o)]
				q := 0
				for v, x := range o {
					pos[q] = int32(v)
					inc := 0
					if kc*x > 0 {
						inc = 1
					}
					q += inc
				}
				sp, val := w.spos[b], w.sval[b]
				n0 := len(val)
				for _, v := range pos[:q] {
					x := o[v]
					num := kc * x
					rss := ss[v] - x*x
					t := 0.0
					if rss > 1e-12*ss[v] {
						t = num / math.Sqrt(rss/nu)
					}
					if t > mx {
						mx = t
					}
					if f := float32(t); f > 0 {
						sp = append(sp, uint8(v))
						val = append(val, f)
					}
				}
				w.spos[b], w.sval[b] = sp, val
				w.scnt[b][v0/flipSub] = uint16(len(val) - n0)
			case skip && grid != nil:
				for v, x := range o {
					num := kc * x
					if !(num > 0) {
						grid[vx[v]] = 0
						continue
					}
					rss := ss[v] - x*x
					t := 0.0
					if rss > 1e-12*ss[v] {
						t = num / math.Sqrt(rss/nu)
					}
					grid[vx[v]] = float32(t)
					if t > mx {
						mx = t
					}
				}
			case skip:
				for v, x := range o {
					num := kc * x
					if !(num > 0) {
						continue
					}
					rss := ss[v] - x*x
					if rss > 1e-12*ss[v] {
						if t := num / math.Sqrt(rss/nu); t > mx {
							mx = t
						}
					} else if 0 > mx {
						mx = 0
					}
				}
			default:
				st := w.st[:len(o)]
				for v, x := range o {
					rss := ss[v] - x*x
					t := 0.0
					if rss > 1e-12*ss[v] {
						t = kc * x / math.Sqrt(rss/nu)
					}
					st[v] = t
					if t > mx {
						mx = t
					}
				}
				if grid != nil {
					for v, t := range st {
						grid[vx[v]] = float32(t)
					}
				}
				if w.exceed != nil {
					ex, tol := w.exceed[v0:v0+sl], w.tol[v0:v0+sl]
					for v, t := range st {
						if t >= tol[v] {
							ex[v]++
						}
					}
				}
			}
			w.max[b].Stat = mx
		}
	}
}

// stat computes the statistic of relabelling b of the block for voxels c0..c0+cl into w.st
// and updates its maximum: mm = |m|², num = K m, t = num / sqrt((SS − mm)/ν) or
// F = (|num|²/q) / ((SS − mm)/ν).
func (w *worker) stat(b, c0, cl int) {
	p, m := w.p, w.p.M
	r, rows := m.r, w.rows
	k0 := r - rows
	nu := m.DF
	nk := 1
	if m.F {
		nk = m.Q
	}
	c1 := c0 + cl
	ss := p.ss[c0:c1]
	mm := w.mm[:cl]
	num := w.num[:nk*chunk]
	for l := range nk {
		clear(num[l*chunk : l*chunk+cl])
	}
	if m.invariant {
		m0 := p.m0[c0:c1]
		for v, x := range m0 {
			mm[v] = x * x
		}
		for l := range nk {
			axpy(num[l*chunk:l*chunk+cl], m.k[l*r], m0)
		}
	} else {
		clear(mm)
	}
	for kk := range rows {
		o := w.out[(b*rows+kk)*chunk : (b*rows+kk)*chunk+cl]
		for v, x := range o {
			mm[v] += x * x
		}
		for l := range nk {
			axpy(num[l*chunk:l*chunk+cl], m.k[l*r+k0+kk], o)
		}
	}
	st := w.st[:cl]
	for v := range cl {
		rss := ss[v] - mm[v]
		t := 0.0
		if rss > 1e-12*ss[v] {
			if m.F {
				q := 0.0
				for l := range nk {
					x := num[l*chunk+v]
					q += x * x
				}
				t = (q / float64(nk)) / (rss / nu)
			} else {
				t = num[v] / math.Sqrt(rss/nu)
			}
		}
		st[v] = t
	}
	mx := w.max[b].Stat
	for _, t := range st {
		if t > mx {
			mx = t
		}
	}
	w.max[b].Stat = mx
}

// flipSums computes the m coordinates of the block's sign flips for voxels c0..c0+cl into
// w.out. For each group of flipGroup subjects it tabulates, flipSub voxels at a time, the
// partial sum Σ_{i in group} ±u_ik·rz_i for every sign pattern (2^flipGroup of them, by
// doubling: flipping subject j subtracts 2·u_jk·rz_j), then each relabelling adds one table row
// per group. The cost per relabelling falls from n multiply-adds per voxel to n/flipGroup
// additions; the tables are shared by the block. Every relabelling is summed in the same
// order whatever the block, so results do not depend on the block size or worker count.
func (w *worker) flipSums(nb, c0, cl int) {
	for s0 := 0; s0 < cl; s0 += flipSub {
		sl := min(flipSub, cl-s0)
		for kk := range w.rows {
			w.flipTables(kk, c0+s0, sl)
		}
		// Each relabelling: the sum over groups of its pattern's table row, in group order.
		for b := range nb {
			for kk := range w.rows {
				w.flipSum(w.out[(b*w.rows+kk)*chunk+s0:(b*w.rows+kk)*chunk+s0+sl], b, kk)
			}
		}
	}
}

// flipTables fills the pattern tables of coordinate k0 + kk for voxels v0..v0+sl (sl ≤
// flipSub): tab[((kk·G + g)·np + pattern)·flipSub + v].
func (w *worker) flipTables(kk, v0, sl int) {
	p := w.p
	if p.rz32 == nil {
		w.flipTablesOf(p.rz, p.v, v0, kk, sl)
		return
	}
	// float32 data: the voxels' rows as float64 first (the same values), so that the
	// table loops are those of float64 data.
	n := p.M.N
	if w.conv == nil {
		w.conv = make([]float64, n*flipSub)
	}
	for i := range n {
		dst := w.conv[i*flipSub : i*flipSub+sl]
		for v, x := range p.rz32[i*p.v+v0 : i*p.v+v0+sl] {
			dst[v] = float64(x)
		}
	}
	w.flipTablesOf(w.conv, flipSub, 0, kk, sl)
}

// flipTablesOf fills the tables from residual rows rz[i·stride + v0 : … + sl].
func (w *worker) flipTablesOf(rz []float64, stride, v0, kk, sl int) {
	m := w.p.M
	n, r, G := m.N, m.r, w.ngrp
	k := r - w.rows + kk
	const np = 1 << flipGroup
	for g := range G {
		i0 := flipGroup * g
		gs := min(flipGroup, n-i0)
		base := (kk*G + g) * np * flipSub
		t0 := w.tab[base : base+sl]
		clear(t0)
		for j := range gs {
			i := i0 + j
			axpy(t0, m.u[i*r+k], rz[i*stride+v0:i*stride+v0+sl])
		}
		for j := range gs {
			i := i0 + j
			a := -2 * m.u[i*r+k]
			x := rz[i*stride+v0 : i*stride+v0+sl]
			for q := range 1 << j {
				src := w.tab[base+q*flipSub : base+q*flipSub+sl]
				dst := w.tab[base+(q|1<<j)*flipSub : base+(q|1<<j)*flipSub+sl]
				flipRow(dst, src, a, x)
			}
		}
	}
}

// flipSum sets o to coordinate k0 + kk of relabelling b of the block for the voxels of the
// tables (len(o) of them): the sum over groups of its pattern's table row, in group order.
func (w *worker) flipSum(o []float64, b, kk int) {
	G := w.ngrp
	const np = 1 << flipGroup
	pat := w.pat[b*G : (b+1)*G]
	sl := len(o)
	row := func(g int) []float64 {
		at := ((kk*G+g)*np + int(pat[g])) * flipSub
		return w.tab[at : at+sl]
	}
	g := 0
	switch {
	case G >= 4:
		sum4(o, row(0), row(1), row(2), row(3), false)
		g = 4
	default:
		copy(o, row(0))
		g = 1
	}
	for ; g+4 <= G; g += 4 {
		sum4(o, row(g), row(g+1), row(g+2), row(g+3), true)
	}
	for ; g < G; g++ {
		add(o, row(g))
	}
}

// flipRow sets dst = src + a·x.
func flipRow(dst, src []float64, a float64, x []float64) {
	src, x = src[:len(dst)], x[:len(dst)]
	for v := range dst {
		dst[v] = src[v] + a*x[v]
	}
}

// sum4 sets (or, with acc, adds to) o the sum (a + b) + (c + d).
func sum4(o, a, b, c, d []float64, acc bool) {
	a, b, c, d = a[:len(o)], b[:len(o)], c[:len(o)], d[:len(o)]
	if acc {
		for v := range o {
			o[v] += (a[v] + b[v]) + (c[v] + d[v])
		}
		return
	}
	for v := range o {
		o[v] = (a[v] + b[v]) + (c[v] + d[v])
	}
}

func add(o, a []float64) {
	a = a[:len(o)]
	for v := range o {
		o[v] += a[v]
	}
}

// keepOr returns the grid a block's relabelling b writes: the observed one when keeping.
func keepOr(keep *Observed, grids [][]float32, b int, dims [3]int) []float32 {
	if keep == nil {
		return grids[b]
	}
	if keep.Grid == nil {
		keep.Grid = make([]float32, dims[0]*dims[1]*dims[2])
	}
	return keep.Grid
}

// classRep returns a representative subject of each design-row class.
func (m *Model) classRep() []int {
	rep := make([]int, len(m.counts))
	for c := range rep {
		rep[c] = -1
	}
	for i, c := range m.class {
		if rep[c] < 0 {
			rep[c] = i
		}
	}
	return rep
}

// dotRows adds Σ_i a[i]·rz[i*V + c0 : i*V + c0 + len(o)] to o, four rows at a time.
func dotRows[T float](o, a []float64, rz []T, V, c0 int) {
	n := len(a)
	cl := len(o)
	i := 0
	for ; i+8 <= n; i += 8 {
		r0 := rz[i*V+c0 : i*V+c0+cl]
		r1 := rz[(i+1)*V+c0 : (i+1)*V+c0+cl]
		r2 := rz[(i+2)*V+c0 : (i+2)*V+c0+cl]
		r3 := rz[(i+3)*V+c0 : (i+3)*V+c0+cl]
		r4 := rz[(i+4)*V+c0 : (i+4)*V+c0+cl]
		r5 := rz[(i+5)*V+c0 : (i+5)*V+c0+cl]
		r6 := rz[(i+6)*V+c0 : (i+6)*V+c0+cl]
		r7 := rz[(i+7)*V+c0 : (i+7)*V+c0+cl]
		a0, a1, a2, a3 := a[i], a[i+1], a[i+2], a[i+3]
		a4, a5, a6, a7 := a[i+4], a[i+5], a[i+6], a[i+7]
		for v := range o {
			o[v] += (a0*float64(r0[v]) + a1*float64(r1[v]) + a2*float64(r2[v]) + a3*float64(r3[v])) + (a4*float64(r4[v]) + a5*float64(r5[v]) + a6*float64(r6[v]) + a7*float64(r7[v]))
		}
	}
	for ; i+4 <= n; i += 4 {
		r0 := rz[i*V+c0 : i*V+c0+cl]
		r1 := rz[(i+1)*V+c0 : (i+1)*V+c0+cl]
		r2 := rz[(i+2)*V+c0 : (i+2)*V+c0+cl]
		r3 := rz[(i+3)*V+c0 : (i+3)*V+c0+cl]
		a0, a1, a2, a3 := a[i], a[i+1], a[i+2], a[i+3]
		for v := range o {
			o[v] += a0*float64(r0[v]) + a1*float64(r1[v]) + a2*float64(r2[v]) + a3*float64(r3[v])
		}
	}
	for ; i < n; i++ {
		r := rz[i*V+c0 : i*V+c0+cl]
		ai := a[i]
		for v := range o {
			o[v] += ai * float64(r[v])
		}
	}
}
