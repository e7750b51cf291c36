package motion

import (
	"math/rand/v2"
	"testing"
)

// BenchmarkEstimate times Estimate on a 64×64×36 grid (the demo's size),
// cycling through volumes with small frame-to-frame motion (a drift of up to
// 0.3 mm and 0.3° per volume, typical of a cooperative subject).
func BenchmarkEstimate(b *testing.B) {
	rng := rand.New(rand.NewPCG(9, 9))
	g := testGrid([3]int{64, 64, 36})
	ref := movedVolume(g, Params{}, 4, rng)
	const nv = 8
	vols := make([][]float32, nv)
	var p Params
	for v := range vols {
		for a := 0; a < 6; a++ {
			p[a] += 0.3 * (2*rng.Float64() - 1)
		}
		vols[v] = movedVolume(g, p, 4, rng)
	}
	rl, err := NewRealigner(g, ref, Options{})
	if err != nil {
		b.Fatal(err)
	}
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		if i%nv == 0 {
			rl.prev = Params{} // start each cycle from the reference position
		}
		if _, err := rl.Estimate(vols[i%nv]); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(b.N)/b.Elapsed().Seconds(), "vol/s")
}

func BenchmarkResample(b *testing.B) {
	rng := rand.New(rand.NewPCG(9, 9))
	g := testGrid([3]int{64, 64, 36})
	ref := movedVolume(g, Params{}, 0, rng)
	rl, err := NewRealigner(g, ref, Options{})
	if err != nil {
		b.Fatal(err)
	}
	out := make([]float32, len(ref))
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		rl.Resample(out, ref, Params{0.5, 0.2, -0.1, 0.3, 0.1, -0.2})
	}
	b.ReportMetric(float64(b.N)/b.Elapsed().Seconds(), "vol/s")
}
