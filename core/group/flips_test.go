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
