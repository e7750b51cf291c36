package nullcheck

import (
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"gonum.org/v1/gonum/mat"

	"winnow/core/design"
)

// tiledBlocks is an AB block design without rest: blocks of 16 s alternate from 0 s to
// the end of the run, so the events tile their span.
func tiledBlocks(n int, tr float64) []design.Condition {
	conds := []design.Condition{{Name: "pattern"}, {Name: "control"}}
	for k, on := 0, 0.0; on+16 <= float64(n)*tr; k, on = k+1, on+16 {
		c := &conds[k%2]
		c.Onsets = append(c.Onsets, on)
		c.Durations = append(c.Durations, 16)
	}
	return conds
}

// TestTiledBlocksRelabel: with events that tile the run, every chance design is a
// relabelling of the real blocks; the reference condition's columns leave the chance
// model, a comparison contrast maps to the other condition's column, and a contrast that
// is not a comparison is refused with a message that says why.
func TestTiledBlocksRelabel(t *testing.T) {
	const n, tr = 120, 2.0
	conds := tiledBlocks(n, tr)
	real, err := design.Build(conds, design.Options{Volumes: n, TR: tr, HighpassSec: 128})
	if err != nil {
		t.Fatal(err)
	}
	d, err := Draw(conds, real, Options{Designs: 20, Volumes: n, TR: tr})
	if err != nil {
		t.Fatalf("draw on tiled blocks: %v", err)
	}
	if d.Reference != "control" || len(d.Columns) != 1 || d.Columns[0] != "pattern" {
		t.Fatalf("reference %q, columns %v; want control and [pattern]", d.Reference, d.Columns)
	}
	for k, ev := range d.Events {
		if len(ev[0].Onsets) != len(conds[0].Onsets) || len(ev[1].Onsets) != len(conds[1].Onsets) {
			t.Fatalf("design %d: %d and %d blocks, want %d and %d", k, len(ev[0].Onsets), len(ev[1].Onsets), len(conds[0].Onsets), len(conds[1].Onsets))
		}
		// The union of the blocks is the real union: every onset is a multiple of 16 s.
		for _, c := range ev {
			for _, on := range c.Onsets {
				if r := math.Mod(on, 16); math.Min(r, 16-r) > 1e-9 {
					t.Fatalf("design %d: onset %g is not on the real block grid", k, on)
				}
			}
		}
	}
	cols := real.Columns
	w := make([]float64, len(cols))
	w[0], w[1] = 1, -1 // pattern − control
	got, err := d.Contrast("pattern-control", [][]float64{w}, cols)
	if err != nil || len(got) != 1 || len(got[0]) != 1 || got[0][0] != 1 {
		t.Fatalf("pattern - control: %v, %v; want [[1]]", got, err)
	}
	one := make([]float64, len(cols))
	one[0] = 1
	if _, err := d.Contrast("pattern", [][]float64{one}, cols); err == nil || !strings.Contains(err.Error(), "sum to zero") {
		t.Fatalf("pattern alone: %v; want a refusal asking for weights that sum to zero", err)
	}

	// The statistic of the reduced model equals that of the comparison in the full,
	// rank-deficient model [real | pattern | control] through the pseudo-inverse: an
	// estimable function's estimate and variance do not depend on the generalised
	// inverse (Searle, Linear Models, 1971, ch. 5; common practice).
	rng := rand.New(rand.NewPCG(3, 4))
	const m = 40
	y := ar1Data(rng, real.X, m, make([]float64, m))
	dims := [3]int{m, 1, 1}
	voxels := make([]int32, m)
	for v := range voxels {
		voxels[v] = int32(v)
	}
	acc := NewAccumulator(d, real.X, dims, voxels, false)
	vol := make([]float32, m)
	yr := make([][]float64, m)
	for v := range yr {
		yr[v] = make([]float64, n)
	}
	for tt := range n {
		for v := range m {
			vol[v] = float32(y[tt][v])
			yr[v][tt] = float64(vol[v])
		}
		acc.AddVolume(vol)
	}
	valid := make([]bool, m)
	for v := range valid {
		valid[v] = true
	}
	worst := 0.0
	err = acc.Solve(nil, valid, [][][]float64{got}, func(k int, st []Stat) error {
		b, err := design.Build(d.Events[k], design.Options{Volumes: n, TR: tr})
		if err != nil {
			return err
		}
		_, p := real.X.Dims()
		full := mat.NewDense(n, p+2, nil)
		full.Slice(0, n, 0, p).(*mat.Dense).Copy(real.X)
		for j, name := range []string{"pattern", "control"} {
			for c, col := range b.Columns {
				if col.Name == name {
					for tt := range n {
						full.Set(tt, p+j, b.X.At(tt, c))
					}
				}
			}
		}
		c := make([]float64, p+2)
		c[p], c[p+1] = 1, -1
		for v := 0; v < m; v += 7 {
			want := pinvT(full, yr[v], c)
			worst = math.Max(worst, math.Abs(st[0].Stat[v]-want)/math.Max(1, math.Abs(want)))
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("largest relative difference from the rank-deficient full model: %.2g", worst)
	if worst > 1e-4 { // float32 chance sums, as in TestSolveMatchesExplicitGLS
		t.Errorf("largest difference %.3g, want ≤ 1e−4", worst)
	}
}

// pinvT is the OLS t of contrast c in the (possibly rank-deficient) model x, through the
// Moore–Penrose pseudo-inverse (SVD), with ν = rows − rank.
func pinvT(x *mat.Dense, y []float64, c []float64) float64 {
	n, p := x.Dims()
	var svd mat.SVD
	if !svd.Factorize(x, mat.SVDThin) {
		panic("svd")
	}
	s := svd.Values(nil)
	var u, v mat.Dense
	svd.UTo(&u)
	svd.VTo(&v)
	rank := 0
	for _, sv := range s {
		if sv > 1e-10*s[0] {
			rank++
		}
	}
	// pinv(X) = V S⁺ U'; (X'X)⁺ = V S⁺² V'.
	yv := mat.NewVecDense(n, y)
	beta := mat.NewVecDense(p, nil)
	cv := mat.NewVecDense(p, c)
	vc := 0.0
	for k := range rank {
		uk := u.ColView(k)
		vk := v.ColView(k)
		beta.AddScaledVec(beta, mat.Dot(uk, yv)/s[k], vk)
		cvk := mat.Dot(cv, vk)
		vc += cvk * cvk / (s[k] * s[k])
	}
	var fit mat.VecDense
	fit.MulVec(x, beta)
	fit.SubVec(yv, &fit)
	s2 := mat.Dot(&fit, &fit) / float64(n-rank)
	return mat.Dot(cv, beta) / math.Sqrt(s2*vc)
}
