package group

import (
	"context"
	"math"
	"math/rand/v2"
	"slices"
	"testing"

	"winnow/core/cluster"

	"gonum.org/v1/gonum/mat"
)

// olsT is the ordinary least-squares t of contrast c for data y on design x (textbook GLM:
// t = c'β̂ / sqrt(σ̂² c'(X'X)⁻¹c), σ̂² = RSS/(n − p)).
func olsT(t *testing.T, x *mat.Dense, y []float64, c []float64) float64 {
	n, p := x.Dims()
	var beta mat.VecDense
	if err := beta.SolveVec(x, mat.NewVecDense(n, y)); err != nil {
		t.Fatal(err)
	}
	var fit mat.VecDense
	fit.MulVec(x, &beta)
	rss := 0.0
	for i := range n {
		r := y[i] - fit.AtVec(i)
		rss += r * r
	}
	var xtx, xtxi mat.Dense
	xtx.Mul(x.T(), x)
	if err := xtxi.Inverse(&xtx); err != nil {
		t.Fatal(err)
	}
	cv := mat.NewVecDense(p, c)
	var tmp mat.VecDense
	tmp.MulVec(&xtxi, cv)
	return mat.Dot(cv, &beta) / math.Sqrt(rss/float64(n-p)*mat.Dot(cv, &tmp))
}

// The sign-flip statistics (computed from per-group pattern tables) equal a direct
// recomputation for every relabelling: the one-sample t*(s) = (S/n)/sqrt((SS − S²/n)/((n−1)n))
// of methods j.2 (n = 14: groups of 4, 4, 4 and 2 subjects), and, with a covariate as nuisance,
// the OLS t of the full model refitted to the flipped reduced-model residuals (Freedman & Lane
// 1983; Winkler et al. 2014).
func TestSignFlipStatsDirect(t *testing.T) {
	rng := rand.New(rand.NewPCG(31, 32))
	dims := [3]int{5, 4, 3}
	sp := fullSpace(dims)
	nv := len(sp.Voxels)
	for _, n := range []int{14, 9} {
		y := make([]float64, n*nv)
		for i := range y {
			y[i] = rng.NormFloat64() + 0.4
		}
		cov := make([]float64, n)
		for i := range cov {
			cov[i] = rng.NormFloat64()
		}
		xc := mat.NewDense(n, 2, nil)
		for i := range n {
			xc.SetRow(i, []float64{1, cov[i]})
		}
		for _, tc := range []struct {
			name string
			x    *mat.Dense
			c    []float64
		}{{"one-sample", onesDesign(n), []float64{1}}, {"covariate", xc, []float64{1, 0}}} {
			m, err := NewModel(tc.x, [][]float64{tc.c})
			if err != nil {
				t.Fatal(err)
			}
			if m.Scheme != SignFlips {
				t.Fatalf("%s: scheme %v", tc.name, m.Scheme)
			}
			pl, _ := m.Plan(70, 5)
			null, err := m.Prepare(y, sp).Run(context.Background(), &pl, 0, pl.N, Options{Stats: MaxStat, Workers: 2})
			if err != nil {
				t.Fatal(err)
			}
			// Reduced-model residuals R = (I − Z Z⁺) Y, Z = the covariate column (none for
			// the one-sample test).
			res := append([]float64(nil), y...)
			if tc.name == "covariate" {
				zz := 0.0
				for _, z := range cov {
					zz += z * z
				}
				for k := range nv {
					zy := 0.0
					for i := range n {
						zy += cov[i] * y[i*nv+k]
					}
					for i := range n {
						res[i*nv+k] -= cov[i] * zy / zz
					}
				}
			}
			lab := pl.NewRelabelling()
			for j := range pl.N {
				pl.At(j, lab)
				want := math.Inf(-1)
				ys := make([]float64, n)
				for k := range nv {
					var tk float64
					if tc.name == "one-sample" {
						S, SS := 0.0, 0.0
						for i := range n {
							S += lab.Signs[i] * res[i*nv+k]
							SS += res[i*nv+k] * res[i*nv+k]
						}
						fn := float64(n)
						tk = (S / fn) / math.Sqrt((SS-S*S/fn)/((fn-1)*fn))
					} else {
						for i := range n {
							ys[i] = lab.Signs[i] * res[i*nv+k]
						}
						tk = olsT(t, tc.x, ys, tc.c)
					}
					want = max(want, tk)
				}
				if got := null.Stat[j]; math.Abs(got-want) > 1e-10*math.Max(1, math.Abs(want)) {
					t.Errorf("%s n %d relabelling %d: max t %.15g, direct %.15g", tc.name, n, j, got, want)
				}
			}
		}
	}
}

// The observed maximum TFCE (taken from the local maxima only, as for every relabelling) is
// the maximum of the observed TFCE map, and that map is the exact TFCE of the observed grid.
func TestObservedTFCEMax(t *testing.T) {
	rng := rand.New(rand.NewPCG(41, 42))
	dims := [3]int{12, 10, 8}
	sp := fullSpace(dims)
	n := 10
	y := smoothNoise(rng, n, dims, 1.2)
	for i := range y {
		y[i] += 0.3
	}
	m, err := NewModel(onesDesign(n), [][]float64{{1}})
	if err != nil {
		t.Fatal(err)
	}
	pl, _ := m.Plan(50, 3)
	obs := m.Prepare(y, sp).Observe(&pl, Options{Stats: MaxStat | MaxTFCE})
	want := cluster.TFCE(obs.Grid, dims, cluster.Corners, TFCEE, TFCEH)
	if !slices.Equal(obs.TFCE, want) {
		t.Fatal("observed TFCE map differs from cluster.TFCE of the observed grid")
	}
	if mx := slices.Max(want); obs.Max.TFCE != mx {
		t.Errorf("observed maximum TFCE %.17g, map maximum %.17g", obs.Max.TFCE, mx)
	}
}

// The sign-flip fast path — statistics ≤ 0 skipped and the TFCE fed the voxels > 0 as lists
// (MaxStat, MaxTFCE) — gives bit-identical maxima to the full path, which computes every
// voxel into a grid (forced here by a cluster threshold ≤ 0, which needs the values ≤ 0); the
// identity's maxima are the observed ones; and both agree with a plain recomputation per
// relabelling: t*(s) = (S/n)/sqrt((SS − S²/n)/((n−1)n)) per voxel for the one-sample test
// (methods j.2), rounded to float32 on the grid, and the maximum of cluster.TFCE of that grid
// (the exact TFCE map, Smith & Nichols 2009). Data shifted well above zero with the contrast
// −1 make relabellings whose statistics are all ≤ 0 (every maximum then comes from a full
// recomputation), and a mask with holes checks the voxel indices of the lists.
func TestSignFlipFastPath(t *testing.T) {
	rng := rand.New(rand.NewPCG(51, 52))
	dims := [3]int{11, 9, 7}
	nvox := dims[0] * dims[1] * dims[2]
	var holes Space
	holes.Dims = dims
	for v := range nvox {
		if v%7 != 3 {
			holes.Voxels = append(holes.Voxels, int32(v))
		}
	}
	for _, tc := range []struct {
		name  string
		n     int
		shift float64
		c     float64
		sp    Space
	}{
		{"null", 13, 0, 1, fullSpace(dims)},
		{"effect", 10, 0.6, 1, holes},
		{"all negative", 5, 4, -1, fullSpace(dims)},
	} {
		nv := len(tc.sp.Voxels)
		field := smoothNoise(rng, tc.n, dims, 1.2)
		y := make([]float64, tc.n*nv)
		for i := range tc.n {
			for k, v := range tc.sp.Voxels {
				y[i*nv+k] = field[i*nvox+int(v)] + tc.shift
			}
		}
		m, err := NewModel(onesDesign(tc.n), [][]float64{{tc.c}})
		if err != nil {
			t.Fatal(err)
		}
		pl, _ := m.Plan(60, 9)
		prob := m.Prepare(y, tc.sp)
		fast := Options{Stats: MaxStat | MaxTFCE, Workers: 2}
		full := Options{Stats: MaxStat | MaxTFCE | MaxCluster, Cluster: -1, Workers: 1}
		a, err := prob.Run(context.Background(), &pl, 0, pl.N, fast)
		if err != nil {
			t.Fatal(err)
		}
		b, _ := prob.Run(context.Background(), &pl, 0, pl.N, full)
		if !slices.Equal(a.Stat, b.Stat) || !slices.Equal(a.TFCE, b.TFCE) {
			t.Fatalf("%s: fast and full paths differ", tc.name)
		}
		obs := prob.Observe(&pl, fast)
		if a.Stat[0] != obs.Max.Stat || a.TFCE[0] != obs.Max.TFCE {
			t.Errorf("%s: identity maxima %g, %g; observed %g, %g", tc.name, a.Stat[0], a.TFCE[0], obs.Max.Stat, obs.Max.TFCE)
		}
		lab := pl.NewRelabelling()
		grid := make([]float32, nvox)
		nonPositive := 0
		for j := range pl.N {
			pl.At(j, lab)
			wantT := math.Inf(-1)
			for k, v := range tc.sp.Voxels {
				S, SS := 0.0, 0.0
				for i := range tc.n {
					x := y[i*nv+k]
					S += lab.Signs[i] * x
					SS += x * x
				}
				fn := float64(tc.n)
				tk := tc.c * (S / fn) / math.Sqrt((SS-S*S/fn)/((fn-1)*fn))
				wantT = max(wantT, tk)
				grid[v] = float32(tk)
			}
			if wantT <= 0 {
				nonPositive++
			}
			if got := a.Stat[j]; math.Abs(got-wantT) > 1e-10*math.Max(1, math.Abs(wantT)) {
				t.Errorf("%s relabelling %d: max t %.15g, plain %.15g", tc.name, j, got, wantT)
			}
			// The grids may differ in the last float32 place where the sums' rounding
			// differs, which moves the TFCE by far less than 1e-4 relative.
			wantTFCE := slices.Max(cluster.TFCE(grid, dims, cluster.Corners, TFCEE, TFCEH))
			if got := a.TFCE[j]; math.Abs(got-wantTFCE) > 1e-4*math.Max(1, wantTFCE) {
				t.Errorf("%s relabelling %d: max TFCE %.10g, plain %.10g", tc.name, j, got, wantTFCE)
			}
		}
		if tc.name == "all negative" && nonPositive == 0 {
			t.Errorf("%s: no relabelling with every statistic ≤ 0", tc.name)
		}
		// The same voxels listed in decreasing order (the sparse lists need increasing
		// indices, so this takes the grid): the same values per voxel, the same maxima.
		rev := Space{Dims: dims, Voxels: slices.Clone(tc.sp.Voxels)}
		slices.Reverse(rev.Voxels)
		yr := make([]float64, len(y))
		for i := range tc.n {
			for k := range nv {
				yr[i*nv+k] = y[i*nv+nv-1-k]
			}
		}
		r, _ := m.Prepare(yr, rev).Run(context.Background(), &pl, 0, pl.N, fast)
		if !slices.Equal(r.Stat, a.Stat) || !slices.Equal(r.TFCE, a.TFCE) {
			t.Errorf("%s: voxels in decreasing order give other maxima", tc.name)
		}
	}
}
