package group

import (
	"fmt"
	"math"
	"slices"
	"sort"
)

// Distribution is a sorted permutation null distribution of a maximum (identity included).
type Distribution struct {
	asc []float64
}

// NewDistribution sorts a copy of the maxima.
func NewDistribution(maxima []float64) Distribution {
	a := slices.Clone(maxima)
	slices.Sort(a)
	return Distribution{asc: a}
}

// N is the number of relabellings.
func (d Distribution) N() int { return len(d.asc) }

// Count returns #{j : M_j ≥ t − TieTol·|t|}.
func (d Distribution) Count(t float64) int {
	lim := t - TieTol*math.Abs(t)
	i := sort.SearchFloat64s(d.asc, lim) // first index with asc[i] >= lim
	return len(d.asc) - i
}

// P returns the corrected p of t: Count(t)/N (methods j.3; with the identity among the N this
// equals the Phipson–Smyth (1 + b)/(N_r + 1) for N_r = N − 1 random draws).
func (d Distribution) P(t float64) float64 {
	return float64(d.Count(t)) / float64(len(d.asc))
}

// K returns ⌊α·N⌋, the number of relabellings allowed to exceed the critical value.
func (d Distribution) K(alpha float64) int {
	return int(math.Floor(alpha*float64(len(d.asc)) + 1e-9))
}

// Critical returns the (k+1)-th largest maximum, k = ⌊α·N⌋: a statistic above it has p ≤ α.
// ok is false when k = 0 (too few relabellings for alpha: nothing can pass).
func (d Distribution) Critical(alpha float64) (value float64, ok bool) {
	k := d.K(alpha)
	if k < 1 || k >= len(d.asc) {
		return math.NaN(), false
	}
	return d.asc[len(d.asc)-1-k], true
}

// Above returns #{j : M_j > u}: relabellings whose maximum exceeds u.
func (d Distribution) Above(u float64) int {
	i := sort.Search(len(d.asc), func(i int) bool { return d.asc[i] > u })
	return len(d.asc) - i
}

// Residuals returns the full-model residuals, N×V row-major: rz − U(U'rz).
func (p *Problem) Residuals() []float64 {
	n, v := p.M.N, p.v
	res := make([]float64, n*v)
	coord := p.coords()
	for i := range n {
		p.residualRow(res[i*v:(i+1)*v], i, coord)
	}
	return res
}

// coords returns the coordinates U'rz of the residuals, r×V.
func (p *Problem) coords() []float64 {
	if p.rz32 != nil {
		return coordsOf(p, p.rz32)
	}
	return coordsOf(p, p.rz)
}

func coordsOf[T float](p *Problem, rz []T) []float64 {
	m := p.M
	n, r, v := m.N, m.r, p.v
	coord := make([]float64, r*v)
	for k := range r {
		c := coord[k*v : (k+1)*v]
		for i := range n {
			axpyOf(c, m.u[i*r+k], rz[i*v:(i+1)*v])
		}
	}
	return coord
}

// residualRow sets dst to subject i's full-model residuals, rz_i − Σ_k u_ik·coord_k, the
// coordinates subtracted in order k = 0, 1, ….
func (p *Problem) residualRow(dst []float64, i int, coord []float64) {
	m, v := p.M, p.v
	if p.rz32 != nil {
		for k, x := range p.rz32[i*v : (i+1)*v] {
			dst[k] = float64(x)
		}
	} else {
		copy(dst, p.rz[i*v:(i+1)*v])
	}
	for k := range m.r {
		axpy(dst, -m.u[i*m.r+k], coord[k*v:(k+1)*v])
	}
}

// Smoothness is Smoothness(p.Residuals(), N, p.Space, ν) — the same arithmetic in the same
// order, so the same result — without holding the N×V residuals: they are made again per
// chunk of voxels (with the voxels up to one z step beyond, where the chunk's neighbours lie)
// from the data and the coordinates U'rz.
func (p *Problem) Smoothness() [3]float64 {
	m := p.M
	n, v := m.N, p.v
	sp := p.Space
	if !p.ascending {
		return Smoothness(p.Residuals(), n, sp, m.DF)
	}
	dims := sp.Dims
	coord := p.coords()
	pos := voxelPositions(sp)
	// A neighbour of voxel k (ascending grid indices) lies at most dims[0]·dims[1] places on.
	const step = 4096
	span := min(v, step+dims[0]*dims[1])
	slab := make([]float64, n*span) // voxel-major: slab[(k−k0)·n + i]
	row := make([]float64, span)
	fill := func(k0 int) int {
		w := min(span, v-k0)
		for i := range n {
			r := row[:w]
			if p.rz32 != nil {
				for k, x := range p.rz32[i*v+k0 : i*v+k0+w] {
					r[k] = float64(x)
				}
			} else {
				copy(r, p.rz[i*v+k0:i*v+k0+w])
			}
			for c := range m.r {
				axpy(r, -m.u[i*m.r+c], coord[c*v+k0:c*v+k0+w])
			}
			for k, x := range r {
				slab[k*n+i] = x
			}
		}
		return w
	}
	inv := make([]float64, v)
	for k0 := 0; k0 < v; k0 += step {
		fill(k0)
		for k := k0; k < min(v, k0+step); k++ {
			s := 0.0
			for _, x := range slab[(k-k0)*n : (k-k0+1)*n] {
				s += x * x
			}
			if s > 0 {
				s = 1 / math.Sqrt(s)
			}
			inv[k] = s
		}
	}
	stride := [3]int{1, dims[0], dims[0] * dims[1]}
	var sum [3]float64
	var pairs [3]int
	for k0 := 0; k0 < v; k0 += step {
		fill(k0)
		for k := k0; k < min(v, k0+step); k++ {
			c := int(sp.Voxels[k])
			coord := [3]int{c % dims[0], c / dims[0] % dims[1], c / (dims[0] * dims[1])}
			a := slab[(k-k0)*n : (k-k0+1)*n]
			for ax := range 3 {
				if coord[ax]+1 >= dims[ax] {
					continue
				}
				w := int(pos[c+stride[ax]])
				if w < 0 || inv[k] == 0 || inv[w] == 0 {
					continue
				}
				b := slab[(w-k0)*n : (w-k0+1)*n]
				corr := 0.0
				for i, x := range a {
					corr += x * b[i]
				}
				sum[ax] += 2 * (1 - corr*inv[k]*inv[w])
				pairs[ax]++
			}
		}
	}
	var out [3]float64
	for ax := range 3 {
		if pairs[ax] == 0 {
			out[ax] = math.NaN()
			continue
		}
		out[ax] = fwhmFromD(sum[ax]/float64(pairs[ax]), m.DF)
	}
	return out
}

// voxelPositions returns, per grid voxel, its index among sp.Voxels (−1 outside).
func voxelPositions(sp Space) []int32 {
	dims := sp.Dims
	pos := make([]int32, dims[0]*dims[1]*dims[2])
	for i := range pos {
		pos[i] = -1
	}
	for k, g := range sp.Voxels {
		pos[g] = int32(k)
	}
	return pos
}

// Smoothness estimates the FWHM in voxels per axis of the field whose N realisations are res
// (N×V row-major over sp.Voxels), from the standardised residuals u = r/‖r‖ per voxel:
// d_j = mean over in-mask neighbour pairs along axis j of 2(1 − Σ u(v)u(v+e_j)), corrected for
// ν degrees of freedom as d' = d·ν/(ν+1), FWHM = sqrt(−2 ln 2 / ln(1 − d'/2)) (methods notes
// §f.1; the correction matters at the small ν of group designs). An axis without pairs is NaN.
func Smoothness(res []float64, n int, sp Space, nu float64) [3]float64 {
	v := len(sp.Voxels)
	if len(res) != n*v {
		panic(fmt.Sprintf("group: residuals have %d values, want %d × %d", len(res), n, v))
	}
	dims := sp.Dims
	nvox := dims[0] * dims[1] * dims[2]
	pos := make([]int32, nvox)
	for i := range pos {
		pos[i] = -1
	}
	for k, g := range sp.Voxels {
		pos[g] = int32(k)
	}
	inv := make([]float64, v)
	for i := range n {
		for k, x := range res[i*v : (i+1)*v] {
			inv[k] += x * x
		}
	}
	for k, s := range inv {
		if s > 0 {
			inv[k] = 1 / math.Sqrt(s)
		}
	}
	step := [3]int{1, dims[0], dims[0] * dims[1]}
	var out [3]float64
	for ax := range 3 {
		var a, b []int32
		for k, g := range sp.Voxels {
			c := int(g)
			coord := [3]int{c % dims[0], c / dims[0] % dims[1], c / (dims[0] * dims[1])}
			if coord[ax]+1 >= dims[ax] {
				continue
			}
			w := pos[c+step[ax]]
			if w < 0 || inv[k] == 0 || inv[w] == 0 {
				continue
			}
			a = append(a, int32(k))
			b = append(b, w)
		}
		if len(a) == 0 {
			out[ax] = math.NaN()
			continue
		}
		corr := make([]float64, len(a))
		for i := range n {
			row := res[i*v : (i+1)*v]
			for t := range a {
				corr[t] += row[a[t]] * row[b[t]]
			}
		}
		sum := 0.0
		for t := range a {
			sum += 2 * (1 - corr[t]*inv[a[t]]*inv[b[t]])
		}
		out[ax] = fwhmFromD(sum/float64(len(a)), nu)
	}
	return out
}

func fwhmFromD(d, nu float64) float64 {
	dc := d * nu / (nu + 1)
	if dc <= 0 {
		return math.Inf(1)
	}
	l := math.Log(1 - dc/2)
	if !(l < 0) || dc >= 2 {
		return 0
	}
	return math.Sqrt(-2 * math.Ln2 / l)
}
