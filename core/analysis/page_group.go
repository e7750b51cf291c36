package analysis

// What the page's group mode needs beyond Group: shards kept in memory and
// merged without a file system (a Web Worker has none), the in-mask z
// histogram and the permutation null of the maximum as plotted data, the mean
// of the input maps as a background, and a small synthetic group data set
// for the demo button.

import (
	"bytes"
	"context"
	"encoding/gob"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"

	"winnow/core/group"
	"winnow/core/infer"
	"winnow/core/nifti"
	"winnow/core/nullcheck"
)

// ShardBytes encodes a shard (GroupOptions.Shards > 0) for MergeGroupShards:
// the same record WriteDir stores in group_shard.gob.gz, uncompressed.
func (r *GroupResult) ShardBytes() ([]byte, error) {
	if !r.IsShard() {
		return nil, errors.New("analysis: ShardBytes of a complete group result; want a shard (GroupOptions.Shards > 0)")
	}
	b, fp, err := encodeState(r.state)
	if err != nil {
		return nil, err
	}
	sf := shardFile{Format: shardFormat, Shard: r.shard, Shards: r.state.Shards, Fingerprint: fp, State: b, Nulls: r.nulls}
	// Room for the record at the outset (see encodeState).
	size := 4096 + len(b)
	for _, nl := range r.nulls {
		size += 9 * (len(nl.Stat) + len(nl.Cluster) + len(nl.TFCE))
	}
	var buf bytes.Buffer
	buf.Grow(size)
	if err := gob.NewEncoder(&buf).Encode(&sf); err != nil {
		return nil, err
	}
	return buf.Bytes(), nil
}

// MergeGroupShards joins the encoded shards (ShardBytes) of one sharded
// group run, in any order, each once, into the result one run gives: the
// same checks and the same finishing step as MergeGroup, from memory.
func MergeGroupShards(shards [][]byte) (*GroupResult, error) {
	if len(shards) == 0 {
		return nil, inputErrf("merge", "no shard given; want shards 1/N to N/N")
	}
	named := make([]namedShard, len(shards))
	for i, b := range shards {
		name := fmt.Sprintf("shard %d of %d given", i+1, len(shards))
		sf, err := decodeShard(bytes.NewReader(b), name, "unreadable shard")
		if err != nil {
			return nil, err
		}
		named[i] = namedShard{name, sf}
	}
	return joinShards(named, "")
}

// Histogram returns the in-mask z histogram of contrast c of a complete group
// result, as FitResult.Histogram does for a run (bins 0: 80).
func (r *GroupResult) Histogram(c, bins int) (*Histogram, error) {
	if r.IsShard() || r.Summary == nil {
		return nil, errors.New("analysis: Histogram of a group shard; want a complete result")
	}
	if c < 0 || c >= len(r.Summary.Contrasts) {
		return nil, fmt.Errorf("analysis: contrast %d; want 0 to %d", c, len(r.Summary.Contrasts)-1)
	}
	var zmap []float32
	for _, m := range r.Maps {
		if m.Contrast == c && m.Kind == "z" {
			zmap = m.Data
		}
	}
	fr := &FitResult{Summary: r.Summary, Grid: r.Grid, Mask: r.Mask}
	for ci := range r.Summary.Contrasts {
		cs := &contrastState{}
		if ci == c {
			cs.z = make([]float64, len(r.state.Voxels))
			for k, v := range r.state.Voxels {
				cs.z[k] = float64(zmap[v])
			}
		}
		fr.contrasts = append(fr.contrasts, cs)
	}
	return fr.Histogram(c, bins)
}

// NullHistogram is the permutation null distribution of one contrast's
// maximum, binned for a plot, with the critical value and the observed
// maximum on the same scale.
type NullHistogram struct {
	Contrast  int
	Label     string    // what the maximum is: "max t", "max F", "max TFCE", "largest cluster (voxels)"
	Edges     []float64 // bin edges, len(Counts)+1, ascending, equal width
	Counts    []float64 // relabellings per bin
	N         int       // relabellings, the identity included
	Threshold *float64  // the (k+1)-th largest maximum, k = ⌊α·N⌋; nil when k = 0
	Observed  float64   // the maximum of the unpermuted data
	Exceed    int       // relabellings whose maximum is at least the observed one
}

// NullHistogram bins the permutation null of contrast c's maximum under the
// run's method (bins 0: 60). It is nil, without error, under a parametric
// method (no permutations).
func (r *GroupResult) NullHistogram(c, bins int) (*NullHistogram, error) {
	if r.IsShard() || r.state == nil {
		return nil, errors.New("analysis: NullHistogram of a group shard; want a complete result")
	}
	st := r.state
	if c < 0 || c >= len(st.Contrasts) {
		return nil, fmt.Errorf("analysis: contrast %d; want 0 to %d", c, len(st.Contrasts)-1)
	}
	if !permMethod(st.Method) || c >= len(r.nulls) {
		return nil, nil
	}
	if bins <= 0 {
		bins = 60
	}
	if bins > 10000 {
		return nil, fmt.Errorf("analysis: %d histogram bins; want at most 10000", bins)
	}
	gc, nl := st.Contrasts[c], r.nulls[c]
	h := &NullHistogram{Contrast: c}
	var maxima []float64
	switch st.Method {
	case infer.MethodClusterPerm:
		maxima = nl.Cluster
		h.Label = "largest cluster (voxels)"
		in := make([]bool, st.Grid.Voxels())
		for k, v := range st.Voxels {
			in[v] = gc.Stat[k] > gc.ClusterStat
		}
		_, sizes := clusterLabel(in, st.Grid.Dims)
		for _, s := range sizes {
			h.Observed = math.Max(h.Observed, float64(s))
		}
	case infer.MethodTFCE:
		maxima = nl.TFCE
		h.Label = "max TFCE"
		h.Observed = maxOf(gc.TFCE)
	default:
		maxima = nl.Stat
		h.Label = "max t"
		if gc.F {
			h.Label = "max F"
		}
		h.Observed = maxOf(gc.Stat)
	}
	d := group.NewDistribution(maxima)
	h.N = d.N()
	h.Exceed = d.Count(h.Observed)
	lo, hi := math.Min(0, h.Observed), h.Observed
	for _, m := range maxima {
		if !math.IsNaN(m) {
			lo, hi = math.Min(lo, m), math.Max(hi, m)
		}
	}
	if t, ok := d.Critical(st.Alpha); ok {
		h.Threshold = &t
		hi = math.Max(hi, t)
	}
	if !(hi > lo) {
		hi = lo + 1
	}
	hi += 0.04 * (hi - lo) // room for the observed marker at the right edge
	w := (hi - lo) / float64(bins)
	h.Edges = make([]float64, bins+1)
	for i := range h.Edges {
		h.Edges[i] = lo + w*float64(i)
	}
	h.Edges[bins] = hi
	h.Counts = make([]float64, bins)
	for _, m := range maxima {
		if math.IsNaN(m) {
			continue
		}
		b := min(max(int((m-lo)/w), 0), bins-1)
		h.Counts[b]++
	}
	return h, nil
}

func maxOf(x []float64) float64 {
	m := math.Inf(-1)
	for _, v := range x {
		if v > m {
			m = v
		}
	}
	return m
}

// MeanOfMaps reads 3D maps on one grid and returns their voxel-wise mean
// (non-finite values count as 0), the background of the page's group slices.
func MeanOfMaps(ctx context.Context, maps []Input, lim nifti.Limits) ([]float32, nifti.Grid, error) {
	if len(maps) == 0 {
		return nil, nifti.Grid{}, inputErrf("maps", "none given; want one 3D map per subject")
	}
	var grid nifti.Grid
	var sum []float64
	for i, in := range maps {
		if err := ctx.Err(); err != nil {
			return nil, grid, err
		}
		h, data, err := nifti.ReadImage(in.R, lim)
		if err != nil {
			return nil, grid, inputErr(in.Name, err)
		}
		g := h.Grid()
		if i == 0 {
			grid = g
			sum = make([]float64, g.Voxels())
		} else if g.Dims != grid.Dims || len(data) < len(sum) {
			return nil, grid, inputErrf(in.Name, "grid %v, want %v (the grid of %s)", g.Dims, grid.Dims, maps[0].Name)
		}
		for k := range sum {
			if v := float64(data[k]); !math.IsNaN(v) && !math.IsInf(v, 0) {
				sum[k] += v
			}
		}
	}
	out := make([]float32, len(sum))
	for k, s := range sum {
		out[k] = float32(s / float64(len(maps)))
	}
	return out, grid, nil
}

// ReadBackground reads a 3D image to draw the group maps over; it must be
// on the maps' grid.
func ReadBackground(in Input, grid nifti.Grid, lim nifti.Limits) ([]float32, error) {
	h, data, err := nifti.ReadImage(in.R, lim)
	if err != nil {
		return nil, inputErr(in.Name, err)
	}
	if g := h.Grid(); g.Dims != grid.Dims || len(data) != grid.Voxels() {
		return nil, inputErrf(in.Name, "grid %v, want %v (the grid of the maps)", g.Dims, grid.Dims)
	}
	return data, nil
}

// Group demo: invented data for the page's demo button only.
const (
	demoGroupSubjects = 12
	demoGroupNX       = 32
	demoGroupNY       = 32
	demoGroupNZ       = 20
	demoGroupVoxelMM  = 3.0
	demoGroupEffect   = 1.0
)

// DemoGroupCentre is the voxel at the centre of the group demo's planted
// effect; DemoGroupRadius its radius in voxels (the effect is a sphere with a
// cosine-tapered edge).
var DemoGroupCentre = [3]int{20, 12, 11}

const DemoGroupRadius = 3.5

// DemoGroupFiles generates the group demo: 12 subjects' 3D effect maps
// (subject-01_effect.nii.gz ...) on a 32×32×20 grid of 3 mm voxels. Each map
// is spatially smooth Gaussian noise (unit standard deviation, a separable
// [1 4 6 4 1]/16 kernel applied twice along each axis) inside an ellipsoid
// (zero outside, like a first-level map outside its mask), plus a planted
// effect of 1.0 at DemoGroupCentre. The same seed gives the same files.
func DemoGroupFiles(seed uint64) (names []string, files [][]byte, err error) {
	dims := [3]int{demoGroupNX, demoGroupNY, demoGroupNZ}
	n := dims[0] * dims[1] * dims[2]
	grid := nifti.Grid{Dims: dims, VoxelMM: [3]float64{demoGroupVoxelMM, demoGroupVoxelMM, demoGroupVoxelMM}, SformCode: 1, QformCode: 1}
	for a := range 3 {
		grid.Affine[a][a] = demoGroupVoxelMM
		grid.Affine[a][3] = -demoGroupVoxelMM * float64(dims[a]-1) / 2
	}
	grid.Affine[3][3] = 1
	inside := make([]bool, n)
	effect := make([]float64, n)
	for k := range dims[2] {
		for j := range dims[1] {
			for i := range dims[0] {
				v := i + dims[0]*(j+dims[1]*k)
				e := sq((float64(i)-15.5)/14.5) + sq((float64(j)-15.5)/15) + sq((float64(k)-9.5)/9.2)
				inside[v] = e <= 1
				d := math.Sqrt(sq(float64(i-DemoGroupCentre[0])) + sq(float64(j-DemoGroupCentre[1])) + sq(float64(k-DemoGroupCentre[2])))
				if d < DemoGroupRadius {
					effect[v] = demoGroupEffect
				} else if d < DemoGroupRadius+1.5 {
					effect[v] = demoGroupEffect * 0.5 * (1 + math.Cos(math.Pi*(d-DemoGroupRadius)/1.5))
				}
			}
		}
	}
	rng := rand.New(rand.NewPCG(seed, 0x6d61707367726f75))
	noise := make([]float64, n)
	tmp := make([]float64, n)
	for s := range demoGroupSubjects {
		for v := range noise {
			noise[v] = rng.NormFloat64()
		}
		for range 2 {
			for a := range 3 {
				smoothAxis(noise, tmp, dims, a)
			}
		}
		// Rescale to unit standard deviation (the smoothing shrinks it).
		ss := 0.0
		for _, x := range noise {
			ss += x * x
		}
		sd := math.Sqrt(ss / float64(n))
		data := make([]float32, n)
		for v := range data {
			if inside[v] {
				data[v] = float32(noise[v]/sd + effect[v])
			}
		}
		var buf bytes.Buffer
		if err := nifti.WriteMap(&buf, grid, data, nifti.WriteOptions{Descrip: "winnow group demo (synthetic)"}); err != nil {
			return nil, nil, err
		}
		names = append(names, fmt.Sprintf("subject-%02d_effect.nii.gz", s+1))
		files = append(files, buf.Bytes())
	}
	return names, files, nil
}

// DemoGroupInputs opens the demo files as group inputs (no design: a
// one-sample test of the mean).
func DemoGroupInputs(names []string, files [][]byte) GroupInputs {
	var in GroupInputs
	for i, b := range files {
		in.Maps = append(in.Maps, Input{Name: names[i], R: bytes.NewReader(b), Size: int64(len(b))})
	}
	return in
}

func sq(x float64) float64 { return x * x }

// smoothAxis convolves x along axis a with [1 4 6 4 1]/16 (edges clamped),
// using tmp as scratch.
func smoothAxis(x, tmp []float64, dims [3]int, a int) {
	stride := [3]int{1, dims[0], dims[0] * dims[1]}[a]
	n := dims[a]
	w := [5]float64{1.0 / 16, 4.0 / 16, 6.0 / 16, 4.0 / 16, 1.0 / 16}
	for v := range x {
		c := (v / stride) % n
		s := 0.0
		for t := -2; t <= 2; t++ {
			cc := min(max(c+t, 0), n-1)
			s += w[t+2] * x[v+(cc-c)*stride]
		}
		tmp[v] = s
	}
	copy(x, tmp)
}

// NullCheckText says a group result's null check (summary.null_check) for people: how
// many of the first contrast's null sets (its relabellings: sign-flipped maps, or maps
// relabelled by permuting the subjects) have a maximum beyond the threshold, e.g. "with
// these settings, 250 of 5000 sign-flipped null sets exceed the threshold: about 5 %, 95 %
// interval 4.4-5.6 %"; and a warning when the interval's lower bound lies above alpha (as
// for a run's null check; by construction of the permutation threshold it should not).
// Both are "" for a result without a null check (parametric methods).
func (r *GroupResult) NullCheckText() (sentence, warning string) {
	if r.Summary == nil || r.Summary.NullCheck == nil || r.state == nil || len(r.state.Contrasts) == 0 {
		return "", ""
	}
	nc := r.Summary.NullCheck
	sets := "sign-flipped null sets"
	if r.state.Contrasts[0].Scheme != group.SignFlips.String() {
		sets = "relabelled null sets (subjects permuted)"
	}
	verb := "exceed the threshold"
	if nc.WithFindings == 1 {
		verb = "exceeds the threshold"
	}
	sentence = fmt.Sprintf("with these settings, %d of %d %s %s: about %s %%, 95 %% interval %s-%s %%",
		nc.WithFindings, nc.Designs, sets, verb, nullcheck.Percent(nc.FWEEstimate), nullcheck.Percent(nc.CI95[0]), nullcheck.Percent(nc.CI95[1]))
	if nc.CI95[0] > r.state.Alpha {
		warning = fmt.Sprintf("null check: %d of %d %s exceed the threshold (95 %% interval %s-%s %%), above alpha = %s %%; these settings do not control the familywise error here",
			nc.WithFindings, nc.Designs, sets, nullcheck.Percent(nc.CI95[0]), nullcheck.Percent(nc.CI95[1]), nullcheck.Percent(r.state.Alpha))
	}
	return sentence, warning
}
