package cluster

import (
	"math"
	"math/rand/v2"
)

// Named tolerance tiers.
const (
	tolReference = 1e-10 // reference JSON, absolute (reference README)
	tolClosed    = 1e-9  // own brute force in float64, absolute
	tolFloat32   = 1e-5  // float32 voxels, relative
)

// isNeighbour reports whether two distinct voxels are neighbours under conn, straight from
// the definition (methods §l): 6 shares a face (|Δ|₁ = 1), 18 adds edges (|Δ|₁ ≤ 2,
// |Δ|∞ = 1), 26 adds corners (|Δ|∞ = 1). Common practice.
func isNeighbour(di, dj, dk int, conn Connectivity) bool {
	l1 := abs(di) + abs(dj) + abs(dk)
	linf := max(abs(di), abs(dj), abs(dk))
	if linf != 1 {
		return false
	}
	switch conn {
	case Faces:
		return l1 == 1
	case Edges:
		return l1 <= 2
	}
	return true
}

// floodLabel is a breadth-first flood fill, seeded in linear index order, so components are
// numbered by their lowest index. It is the reference for Label.
func floodLabel(in []bool, dims [3]int, conn Connectivity) ([]int32, []int) {
	nx, ny, nz := dims[0], dims[1], dims[2]
	lab := make([]int32, len(in))
	var sizes []int
	var queue []int
	for s := range in {
		if !in[s] || lab[s] != 0 {
			continue
		}
		l := int32(len(sizes) + 1)
		lab[s] = l
		queue = append(queue[:0], s)
		size := 0
		for len(queue) > 0 {
			v := queue[0]
			queue = queue[1:]
			size++
			i, j, k := v%nx, (v/nx)%ny, v/(nx*ny)
			for dk := -1; dk <= 1; dk++ {
				for dj := -1; dj <= 1; dj++ {
					for di := -1; di <= 1; di++ {
						if !isNeighbour(di, dj, dk, conn) {
							continue
						}
						a, b, c := i+di, j+dj, k+dk
						if a < 0 || b < 0 || c < 0 || a >= nx || b >= ny || c >= nz {
							continue
						}
						u := a + nx*(b+ny*c)
						if in[u] && lab[u] == 0 {
							lab[u] = l
							queue = append(queue, u)
						}
					}
				}
			}
		}
		sizes = append(sizes, size)
	}
	return lab, sizes
}

// smoothNoise is Gaussian-smoothed white noise (separable kernel, σ in voxels, truncated at
// 3σ, zeros beyond the edge), scaled to unit standard deviation.
func smoothNoise(dims [3]int, sigma float64, seed uint64) []float64 {
	rng := rand.New(rand.NewPCG(seed, 1))
	n := dims[0] * dims[1] * dims[2]
	a := make([]float64, n)
	for v := range a {
		a[v] = rng.NormFloat64()
	}
	r := int(math.Ceil(3 * sigma))
	kern := make([]float64, 2*r+1)
	for t := range kern {
		x := float64(t - r)
		kern[t] = math.Exp(-x * x / (2 * sigma * sigma))
	}
	b := make([]float64, n)
	strides := [3]int{1, dims[0], dims[0] * dims[1]}
	for axis := range 3 {
		st, len := strides[axis], dims[axis]
		for v := range a {
			pos := (v / st) % len
			s := 0.0
			for t, kv := range kern {
				q := pos + t - r
				if q >= 0 && q < len {
					s += kv * a[v+(t-r)*st]
				}
			}
			b[v] = s
		}
		a, b = b, a
	}
	var m, ss float64
	for _, x := range a {
		m += x
	}
	m /= float64(n)
	for _, x := range a {
		ss += (x - m) * (x - m)
	}
	sd := math.Sqrt(ss / float64(n))
	for v := range a {
		a[v] = (a[v] - m) / sd
	}
	return a
}

func to32(a []float64) []float32 {
	out := make([]float32, len(a))
	for i, x := range a {
		out[i] = float32(x)
	}
	return out
}
