package group

import (
	"context"
	"math"
	"math/rand/v2"
	"runtime"
	"slices"
	"sync"
	"testing"
	"time"

	"gonum.org/v1/gonum/mat"

	"winnow/core/dist"
)

// smoothNoise returns n realisations of white noise on dims smoothed by a separable Gaussian of
// standard deviation sigma voxels (kernel truncated at 3σ, zero padding), N×V row-major.
func smoothNoise(rng *rand.Rand, n int, dims [3]int, sigma float64) []float64 {
	nv := dims[0] * dims[1] * dims[2]
	rad := int(math.Ceil(3 * sigma))
	ker := make([]float64, 2*rad+1)
	for i := range ker {
		d := float64(i - rad)
		ker[i] = math.Exp(-d * d / (2 * sigma * sigma))
	}
	out := make([]float64, n*nv)
	a, b := make([]float64, nv), make([]float64, nv)
	step := [3]int{1, dims[0], dims[0] * dims[1]}
	for s := range n {
		for v := range a {
			a[v] = rng.NormFloat64()
		}
		for ax := range 3 {
			for v := range b {
				c := v / step[ax] % dims[ax]
				sum := 0.0
				for i, k := range ker {
					cc := c + i - rad
					if cc >= 0 && cc < dims[ax] {
						sum += k * a[v+(i-rad)*step[ax]]
					}
				}
				b[v] = sum
			}
			a, b = b, a
		}
		copy(out[s*nv:(s+1)*nv], a)
	}
	return out
}

func fullSpace(dims [3]int) Space {
	sp := Space{Dims: dims}
	for v := range dims[0] * dims[1] * dims[2] {
		sp.Voxels = append(sp.Voxels, int32(v))
	}
	return sp
}

func onesDesign(n int) *mat.Dense {
	x := mat.NewDense(n, 1, nil)
	for i := range n {
		x.Set(i, 0, 1)
	}
	return x
}

// TestNullFWE measures the familywise error of fwe-perm and tfce on null data: 200 sets of 12
// subjects of smooth Gaussian noise on 16×16×12 voxels, 200 relabellings each (the identity and
// 199 sign flips). Permutation FWE control is exact under symmetry (Nichols & Holmes 2002):
// the rate must not exceed α = 0.05 beyond binomial chance, judged by the exact (Clopper &
// Pearson) 99.9 % interval of the observed rate.
func TestNullFWE(t *testing.T) {
	if testing.Short() || runtime.GOARCH == "wasm" {
		t.Skip("200 null data sets: slow under -short and WebAssembly")
	}
	start := time.Now()
	const sets, n, perms, alpha = 200, 12, 200, 0.05
	dims := [3]int{16, 16, 12}
	sp := fullSpace(dims)
	m, err := NewModel(onesDesign(n), [][]float64{{1}})
	if err != nil {
		t.Fatal(err)
	}
	rng := rand.New(rand.NewPCG(2014, 1))
	foundMax, foundTFCE := 0, 0
	for s := range sets {
		y := smoothNoise(rng, n, dims, 1.2)
		prob := m.Prepare(y, sp)
		pl, err := m.Plan(perms, uint64(1000+s))
		if err != nil {
			t.Fatal(err)
		}
		opt := Options{Stats: MaxStat | MaxTFCE, Workers: 2}
		obs := prob.Observe(&pl, opt)
		null, err := prob.Run(context.Background(), &pl, 0, pl.N, opt)
		if err != nil {
			t.Fatal(err)
		}
		// The identity is relabelling 0 and its maxima are the observed ones.
		if null.Stat[0] != obs.Max.Stat || null.TFCE[0] != obs.Max.TFCE {
			t.Fatalf("set %d: identity maxima %g, %g differ from observed %g, %g", s, null.Stat[0], null.TFCE[0], obs.Max.Stat, obs.Max.TFCE)
		}
		if NewDistribution(null.Stat).P(obs.Max.Stat) <= alpha {
			foundMax++
		}
		if NewDistribution(null.TFCE).P(obs.Max.TFCE) <= alpha {
			foundTFCE++
		}
	}
	for _, c := range []struct {
		name  string
		found int
	}{{"fwe-perm", foundMax}, {"tfce", foundTFCE}} {
		lo, hi := dist.ClopperPearson(c.found, sets, 0.001)
		t.Logf("%s: %d of %d null sets with a finding (FWE %.3f, 99.9%% CI %.3f to %.3f)", c.name, c.found, sets, float64(c.found)/sets, lo, hi)
		if lo > alpha {
			t.Errorf("%s: familywise error %d/%d is above the nominal %g", c.name, c.found, sets, alpha)
		}
		if hi < alpha {
			t.Errorf("%s: familywise error %d/%d is far below the nominal %g (the null looks broken)", c.name, c.found, sets, alpha)
		}
	}
	t.Logf("%v", time.Since(start))
}

// TestWorkersDeterministic: the same seed gives bit-identical maxima for 1 and 4 workers and
// for any split of the relabellings (methods j.4).
func TestWorkersDeterministic(t *testing.T) {
	dims := [3]int{12, 10, 8}
	sp := fullSpace(dims)
	rng := rand.New(rand.NewPCG(5, 5))
	n := 14
	y := smoothNoise(rng, n, dims, 1)
	x := mat.NewDense(n, 3, nil)
	for i := range n {
		x.SetRow(i, []float64{1, float64(i % 2), float64(i*7%5) - 2})
	}
	for _, c := range [][][]float64{{{0, 1, 0}}, {{1, 0, 0}}, {{0, 1, 0}, {0, 0, 1}}} {
		m, err := NewModel(x, c)
		if err != nil {
			t.Fatal(err)
		}
		prob := m.Prepare(y, sp)
		pl, _ := m.Plan(100, 77)
		opt := Options{Stats: MaxStat | MaxCluster | MaxTFCE, Cluster: 2}
		opt.Observed = prob.Observe(&pl, opt)
		opt.Exceed = true
		opt.Workers = 1
		a, err := prob.Run(context.Background(), &pl, 0, pl.N, opt)
		if err != nil {
			t.Fatal(err)
		}
		opt.Workers = 4
		b, _ := prob.Run(context.Background(), &pl, 0, pl.N, opt)
		lo, _ := prob.Run(context.Background(), &pl, 0, 37, opt)
		hi, _ := prob.Run(context.Background(), &pl, 37, pl.N, opt)
		joined := append(slices.Clone(lo.TFCE), hi.TFCE...)
		if !slices.Equal(a.Stat, b.Stat) || !slices.Equal(a.TFCE, b.TFCE) || !slices.Equal(a.Cluster, b.Cluster) || !slices.Equal(a.Exceed, b.Exceed) || !slices.Equal(a.TFCE, joined) {
			t.Errorf("contrast %v: results differ between worker counts or splits", c)
		}
		if m.Scheme == Permutations && opt.Observed.Max.Stat != a.Stat[0] {
			t.Errorf("identity maximum %g, observed %g", a.Stat[0], opt.Observed.Max.Stat)
		}
	}
}

// BenchmarkGroupTFCE is the group_perm_seconds figure: 5000 sign flips with exact TFCE on 20
// maps of 202 612 voxels, on 2 workers. Run it once: go test -run x -bench GroupTFCE -benchtime 1x.
func BenchmarkGroupTFCE(b *testing.B) {
	dims := [3]int{74, 74, 37}
	sp := fullSpace(dims)
	rng := rand.New(rand.NewPCG(1, 2))
	n := 20
	y := smoothNoise(rng, n, dims, 1.5)
	m, err := NewModel(onesDesign(n), [][]float64{{1}})
	if err != nil {
		b.Fatal(err)
	}
	prob := m.Prepare(y, sp)
	pl, _ := m.Plan(5000, 1)
	opt := Options{Stats: MaxStat | MaxTFCE, Workers: 2}
	b.ResetTimer()
	start := cpuTime()
	for range b.N {
		obs := prob.Observe(&pl, opt)
		_ = obs
		if _, err := prob.Run(context.Background(), &pl, 0, pl.N, opt); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(b.Elapsed().Seconds()/float64(b.N), "group_perm_seconds")
	if start != 0 {
		// Process CPU time (both workers): the figure for 2 free cores is about half of it.
		b.ReportMetric((cpuTime()-start).Seconds()/float64(b.N), "cpu_seconds")
	}
}

// benchProblem is the BenchmarkGroupTFCE problem: 20 subjects of smooth noise on 74×74×37.
var benchProblem = sync.OnceValues(func() (*Problem, Plan) {
	dims := [3]int{74, 74, 37}
	sp := fullSpace(dims)
	rng := rand.New(rand.NewPCG(1, 2))
	n := 20
	y := smoothNoise(rng, n, dims, 1.5)
	m, err := NewModel(onesDesign(n), [][]float64{{1}})
	if err != nil {
		panic(err)
	}
	prob := m.Prepare(y, sp)
	pl, _ := m.Plan(5000, 1)
	return prob, pl
})

// benchRelabel measures one worker's CPU time per relabelling (cpu-ms/relabelling) of the
// BenchmarkGroupTFCE problem for the given statistics: 64 sign flips per op.
func benchRelabel(b *testing.B, stats Stats) {
	prob, pl := benchProblem()
	opt := Options{Stats: stats, Workers: 1}
	const per = 64
	b.ResetTimer()
	start := cpuTime()
	for i := range b.N {
		lo := 1 + (i*per)%(pl.N-per)
		if _, err := prob.Run(context.Background(), &pl, lo, lo+per, opt); err != nil {
			b.Fatal(err)
		}
	}
	if start != 0 {
		b.ReportMetric(float64((cpuTime()-start).Nanoseconds())/1e6/float64(b.N*per), "cpu-ms/relabelling")
	}
	b.ReportMetric(b.Elapsed().Seconds()*1e3/float64(b.N*per), "wall-ms/relabelling")
}

// BenchmarkRelabelStat is the statistic alone (MaxStat), one worker.
func BenchmarkRelabelStat(b *testing.B) { benchRelabel(b, MaxStat) }

// BenchmarkRelabelTFCE is the statistic and the maximum TFCE, one worker.
func BenchmarkRelabelTFCE(b *testing.B) { benchRelabel(b, MaxStat|MaxTFCE) }
