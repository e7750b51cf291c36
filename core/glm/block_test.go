package glm

import (
	"math"
	"math/rand/v2"
	"testing"
)

// newBlockRun is newSynthRun on a larger grid: more in-mask voxels than several solver
// blocks (blockVoxels), the last block partial, with one constant voxel (excluded) inside a
// later block.
func newBlockRun(seed uint64, n int) (*synthRun, int32) {
	r := rand.New(rand.NewPCG(seed, 9))
	s := &synthRun{dims: [3]int{9, 8, 5}}
	g := s.dims[0] * s.dims[1] * s.dims[2]
	for i := 0; i < g; i++ {
		if i%11 != 4 {
			s.voxels = append(s.voxels, int32(i))
		}
	}
	s.x = synthDesign(n, true, r)
	_, p := s.x.Dims()
	rho := make([]float64, g)
	beta := make([][]float64, g)
	for i := range rho {
		rho[i] = -0.3 + 1.1*r.Float64()
		beta[i] = make([]float64, p)
		for j := range beta[i] {
			beta[i][j] = 2 * r.NormFloat64()
		}
	}
	constant := s.voxels[2*blockVoxels+5]
	e := make([]float64, g)
	for t := 0; t < n; t++ {
		w := make([]float64, g)
		for i := range w {
			w[i] = r.NormFloat64()
		}
		vol := make([]float32, g)
		for i := range vol {
			sh := w[i]
			if i+1 < g {
				sh += 0.7 * w[i+1]
			}
			if i >= 9 {
				sh += 0.5 * w[i-9]
			}
			e[i] = rho[i]*e[i] + 3*sh
			y := 1000 + e[i]
			for j := 0; j < p; j++ {
				y += s.x.At(t, j) * beta[i][j]
			}
			vol[i] = float32(y)
		}
		vol[constant] = 950
		s.vols = append(s.vols, vol)
	}
	return s, constant
}

// The blocked solves (several blocks of voxels, a partial last block, an excluded voxel in a
// block) against the naive two-pass reference per voxel (explicit residuals and Prais–Winsten
// matrix; methods notes §d.4, §f.2), and the blocked t contrast against the per-voxel
// Fit.Contrast path (identity: the same c'β/SE computed two ways).
func TestBlockedSolveAgainstNaive(t *testing.T) {
	s, constant := newBlockRun(21, 48)
	if len(s.voxels) <= 2*blockVoxels+blockVoxels/2 {
		t.Fatalf("only %d voxels, want several blocks", len(s.voxels))
	}
	_, p := s.x.Dims()
	c := make([]float64, p)
	c[1], c[2] = 1, -0.5
	cf := [][]float64{make([]float64, p), make([]float64, p)}
	cf[0][1], cf[1][3] = 1, 1
	f, _ := s.fit(t, Options{RhoFWHMmm: 6, VoxelMM: [3]float64{3, 3, 3}, Contrasts: [][][]float64{{c}, cf}})
	if f.Excluded != 1 {
		t.Fatalf("excluded %d, want 1 (the constant voxel)", f.Excluded)
	}
	m := explicitM(s.x)
	res := map[int32][]float64{}
	post, err := f.Contrast([][]float64{c})
	if err != nil {
		t.Fatal(err)
	}
	for v, g := range s.voxels {
		if g == constant {
			if f.Valid[v] || !math.IsNaN(f.Sigma2[v]) || !math.IsNaN(f.Stats[0].Stat[v]) || !math.IsNaN(f.Stats[1].Stat[v]) {
				t.Errorf("constant voxel: valid %v, sigma2 %g, t %g", f.Valid[v], f.Sigma2[v], f.Stats[0].Stat[v])
			}
			continue
		}
		o := naiveFit(s.x, s.series(g), f.Rho[v], m, c, cf)
		res[g] = o.resid
		checkRel(t, "rho (bias-reduced, clamped)", f.RhoVoxel[v], min(max(o.rhoBR, RhoMin), RhoMax), 1e-8)
		for j := 0; j < p; j++ {
			checkRel(t, "beta", f.Beta(j)[v], o.beta[j], 1e-8)
		}
		checkRel(t, "rss", f.Sigma2[v]*f.DF, o.rss, 1e-8)
		checkRel(t, "t", f.Stats[0].Stat[v], o.t, 1e-8)
		checkRel(t, "F", f.Stats[1].Stat[v], o.fstat, 1e-8)
		checkRel(t, "t blocked vs per-voxel", f.Stats[0].Stat[v], post.Stat[v], 1e-12)
		checkRel(t, "SE blocked vs per-voxel", f.Stats[0].SE[v], post.SE[v], 1e-12)
	}
	want := naiveFWHM(s, res, f.DF)
	for ax := 0; ax < 3; ax++ {
		checkRel(t, "FWHM", f.FWHMVoxels[ax], want[ax], 1e-8)
	}
}
