package group

import (
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
)

// MaxPerms is the largest number of relabellings a plan accepts.
const MaxPerms = 10_000_000

// Plan is the set of relabellings of one model: either every unique one (exhaustive) or the
// identity and N − 1 random draws.
type Plan struct {
	Scheme     Scheme
	N          int     // relabellings done, the identity included
	Exhaustive bool    // every unique relabelling is done
	Unique     float64 // number of unique relabellings (may exceed 2^53, or be +Inf)
	Seed       uint64

	n      int
	class  []int // identity's class sequence (permutations)
	counts []int
}

// Plan returns the relabellings for at most perms (≥ 1) of them, with the given seed: all the
// unique ones when there are no more than perms, otherwise perms random ones (identity first).
func (m *Model) Plan(perms int, seed uint64) (Plan, error) {
	if perms < 1 || perms > MaxPerms {
		return Plan{}, fmt.Errorf("%d permutations; want 1 to %d", perms, MaxPerms)
	}
	pl := Plan{Scheme: m.Scheme, Seed: seed, n: m.N, class: m.class, counts: m.counts}
	if m.Scheme == SignFlips {
		pl.Unique = math.Ldexp(1, m.N)
	} else {
		lg, _ := math.Lgamma(float64(m.N + 1))
		for _, c := range m.counts {
			l, _ := math.Lgamma(float64(c + 1))
			lg -= l
		}
		pl.Unique = math.Round(math.Exp(lg))
	}
	if pl.Unique <= float64(perms)*(1+1e-9) {
		if m.Scheme == Permutations {
			pl.Unique = float64(multinomial(m.counts))
		}
		if pl.Unique <= float64(perms) {
			pl.Exhaustive = true
			pl.N = int(pl.Unique)
			return pl, nil
		}
	}
	pl.N = perms
	return pl, nil
}

// multinomial returns (Σc)!/Π c! exactly; the caller knows it is small (≤ MaxPerms·(1+1e-9)).
func multinomial(counts []int) uint64 {
	total := uint64(1)
	sum := 0
	for _, c := range counts {
		// total *= C(sum + c, c), built up as C(sum+i, i) = C(sum+i−1, i−1)·(sum+i)/i.
		b := uint64(1)
		for i := 1; i <= c; i++ {
			b = b * uint64(sum+i) / uint64(i)
		}
		total *= b
		sum += c
	}
	return total
}

// Relabelling is one relabelling: Signs (sign flips, ±1 per subject) or Class (permutations:
// the design-row class each subject's data is paired with).
type Relabelling struct {
	Signs []float64
	Class []int
}

// NewRelabelling returns a buffer for the plan's relabellings.
func (pl *Plan) NewRelabelling() Relabelling {
	if pl.Scheme == SignFlips {
		return Relabelling{Signs: make([]float64, pl.n)}
	}
	return Relabelling{Class: make([]int, pl.n)}
}

// IdentityIndex returns the index of the identity among the plan's relabellings.
func (pl *Plan) IdentityIndex() int {
	if !pl.Exhaustive || pl.Scheme == SignFlips {
		return 0
	}
	return int(rankMultiset(pl.class, pl.counts))
}

// At fills dst with relabelling j (0 ≤ j < N).
func (pl *Plan) At(j int, dst Relabelling) {
	if j < 0 || j >= pl.N {
		panic(fmt.Sprintf("group: relabelling %d of %d", j, pl.N))
	}
	switch {
	case pl.Exhaustive && pl.Scheme == SignFlips:
		for i := range dst.Signs {
			dst.Signs[i] = 1
			if j>>i&1 == 1 {
				dst.Signs[i] = -1
			}
		}
	case pl.Exhaustive:
		unrankMultiset(uint64(j), pl.counts, dst.Class)
	case j == 0:
		if pl.Scheme == SignFlips {
			for i := range dst.Signs {
				dst.Signs[i] = 1
			}
		} else {
			copy(dst.Class, pl.class)
		}
	case pl.Scheme == SignFlips:
		rng := rand.New(rand.NewPCG(mix(pl.Seed, uint64(j), 1), mix(pl.Seed, uint64(j), 2)))
		for {
			flipped := false
			var bits uint64
			for i := range dst.Signs {
				if i%64 == 0 {
					bits = rng.Uint64()
				}
				dst.Signs[i] = 1
				if bits>>(i%64)&1 == 1 {
					dst.Signs[i] = -1
					flipped = true
				}
			}
			if flipped {
				return
			}
		}
	default:
		rng := rand.New(rand.NewPCG(mix(pl.Seed, uint64(j), 1), mix(pl.Seed, uint64(j), 2)))
		for {
			copy(dst.Class, pl.class)
			rng.Shuffle(len(dst.Class), func(a, b int) { dst.Class[a], dst.Class[b] = dst.Class[b], dst.Class[a] })
			if !slices.Equal(dst.Class, pl.class) {
				return
			}
		}
	}
}

// mix derives a 64-bit seed word from (seed, j, lane) with the splitmix64 finaliser, so that
// neighbouring j give unrelated generator states.
func mix(seed, j, lane uint64) uint64 {
	z := seed ^ (j+1)*0x9e3779b97f4a7c15 ^ lane*0xd1b54a32d192ed03
	for range 2 {
		z = (z ^ z>>30) * 0xbf58476d1ce4e5b9
		z = (z ^ z>>27) * 0x94d049bb133111eb
		z ^= z >> 31
	}
	return z
}

// unrankMultiset writes the j-th (0-based) sequence, in lexicographic order, of the multiset
// with counts[c] copies of class c.
func unrankMultiset(j uint64, counts []int, dst []int) {
	c := slices.Clone(counts)
	rem := len(dst)
	total := multinomial(c)
	for i := range dst {
		for k := range c {
			if c[k] == 0 {
				continue
			}
			// Sequences that start with k: total·c[k]/rem.
			num := total * uint64(c[k]) / uint64(rem)
			if j < num {
				dst[i] = k
				c[k]--
				total = num
				break
			}
			j -= num
		}
		rem--
	}
}

// rankMultiset is the inverse of unrankMultiset.
func rankMultiset(seq []int, counts []int) uint64 {
	c := slices.Clone(counts)
	rem := len(seq)
	total := multinomial(c)
	var j uint64
	for _, s := range seq {
		for k := 0; k < s; k++ {
			if c[k] > 0 {
				j += total * uint64(c[k]) / uint64(rem)
			}
		}
		total = total * uint64(c[s]) / uint64(rem)
		c[s]--
		rem--
	}
	return j
}
