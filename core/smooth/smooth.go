package smooth

import (
	"fmt"
	"math"
)

// fwhmPerSigma is sqrt(8 ln 2), the FWHM of a Gaussian in units of its σ.
var fwhmPerSigma = math.Sqrt(8 * math.Ln2)

// MinSigma is the smallest σ (voxels) that is filtered; thinner kernels are essentially a delta.
const MinSigma = 0.3

// Sigmas converts a FWHM in mm into σ in voxels along each array axis, given the voxel spacing
// in mm along each axis. A non-positive spacing gives σ = 0 on that axis (not filtered).
func Sigmas(fwhmMM float64, spacingMM [3]float64) [3]float64 {
	var s [3]float64
	for i, d := range spacingMM {
		if d > 0 && fwhmMM > 0 {
			s[i] = fwhmMM / fwhmPerSigma / d
		}
	}
	return s
}

// Kernel returns the normalised 1D Gaussian kernel of standard deviation sigma (voxels):
// weights exp(−d²/(2σ²)) for d = −r..r, r = floor(4σ + 0.5), summing to 1. A non-positive or
// non-finite sigma gives the identity kernel {1}.
func Kernel(sigma float64) []float64 {
	if !(sigma > 0) || math.IsInf(sigma, 0) {
		return []float64{1}
	}
	r := int(4*sigma + 0.5)
	k := make([]float64, 2*r+1)
	sum := 0.0
	for d := -r; d <= r; d++ {
		w := math.Exp(-0.5 * float64(d*d) / (sigma * sigma))
		k[d+r] = w
		sum += w
	}
	for i := range k {
		k[i] /= sum
	}
	return k
}

// Smoother filters volumes of one grid with one kernel per axis, normalised within one mask.
// It holds reusable buffers, so one Smoother must not be used from two goroutines at once.
type Smoother struct {
	dims    [3]int
	n       int
	kernels [3][]float64 // nil: axis skipped
	mask    []bool       // nil: whole grid
	inv     []float64    // 1/S(m) inside the mask, 0 outside
	a, b    []float64
}

// New prepares a Smoother for volumes of the given dims, with σ (voxels) per axis and a mask
// over the full grid (nil means every voxel). It panics when len(mask) does not match dims or
// a dim is not positive (a caller bug).
func New(dims [3]int, sigma [3]float64, mask []bool) *Smoother {
	for i, d := range dims {
		if d <= 0 {
			panic(fmt.Sprintf("smooth: dims[%d] = %d, want > 0", i, d))
		}
	}
	n := dims[0] * dims[1] * dims[2]
	if mask != nil && len(mask) != n {
		panic(fmt.Sprintf("smooth: mask has %d voxels, want %d", len(mask), n))
	}
	s := &Smoother{dims: dims, n: n, mask: mask, a: make([]float64, n), b: make([]float64, n)}
	for i, sg := range sigma {
		if sg >= MinSigma && dims[i] > 1 {
			s.kernels[i] = Kernel(sg)
		}
	}
	// S(m), computed once.
	for i := range s.a {
		if mask == nil || mask[i] {
			s.a[i] = 1
		}
	}
	den := s.filter()
	s.inv = make([]float64, n)
	for i, d := range den {
		if (mask == nil || mask[i]) && d > 0 {
			s.inv[i] = 1 / d
		}
	}
	return s
}

// Active reports whether any axis is filtered.
func (s *Smoother) Active() bool {
	return s.kernels[0] != nil || s.kernels[1] != nil || s.kernels[2] != nil
}

// Float64 writes the smoothed src into dst (both full-grid; they may be the same slice).
// Inside the mask dst is S(src·m)/S(m); outside it is 0. Non-finite values inside the mask
// propagate: callers mark them outside the mask first.
func (s *Smoother) Float64(dst, src []float64) {
	s.check(len(dst), len(src))
	a := s.a[:s.n]
	src = src[:s.n]
	if s.mask == nil {
		copy(a, src)
	} else {
		m := s.mask[:s.n]
		for i, v := range src {
			if m[i] {
				a[i] = v
			} else {
				a[i] = 0
			}
		}
	}
	out := s.filter()
	inv := s.inv[:s.n]
	dst = dst[:s.n]
	for i, v := range out {
		dst[i] = v * inv[i]
	}
}

// Float32 is Float64 for float32 volumes; the arithmetic is in float64.
func (s *Smoother) Float32(dst, src []float32) {
	s.check(len(dst), len(src))
	a := s.a[:s.n]
	src = src[:s.n]
	if s.mask == nil {
		for i, v := range src {
			a[i] = float64(v)
		}
	} else {
		m := s.mask[:s.n]
		for i, v := range src {
			if m[i] {
				a[i] = float64(v)
			} else {
				a[i] = 0
			}
		}
	}
	out := s.filter()
	inv := s.inv[:s.n]
	dst = dst[:s.n]
	for i, v := range out {
		dst[i] = float32(v * inv[i])
	}
}

func (s *Smoother) check(nd, ns int) {
	if nd != s.n || ns != s.n {
		panic(fmt.Sprintf("smooth: volume lengths %d (dst), %d (src), want %d", nd, ns, s.n))
	}
}

// filter runs the active passes on s.a and returns the buffer holding the result (s.a or s.b).
func (s *Smoother) filter() []float64 {
	in, out := s.a, s.b
	nx, ny, nz := s.dims[0], s.dims[1], s.dims[2]
	if k := s.kernels[0]; k != nil {
		// rows along x: dst_row += w_d * src_row shifted by d.
		clear(out)
		for r := 0; r < ny*nz; r++ {
			off := r * nx
			convolve(out[off:off+nx], in[off:off+nx], k, 1, nx)
		}
		in, out = out, in
	}
	if k := s.kernels[1]; k != nil {
		// within each z slice, shifting by d rows is a shift by d·nx of one contiguous slab.
		clear(out)
		slab := nx * ny
		for z := 0; z < nz; z++ {
			off := z * slab
			convolve(out[off:off+slab], in[off:off+slab], k, nx, ny)
		}
		in, out = out, in
	}
	if k := s.kernels[2]; k != nil {
		clear(out)
		convolve(out, in, k, nx*ny, nz)
		in, out = out, in
	}
	return in
}

// convolve adds to dst the 1D convolution of src along an axis of length m whose elements
// are stride apart: dst[i] += Σ_d k[d+r]·src[i + d·stride] for shifts that stay inside.
// Each shift is one long contiguous axpy over (m−|d|)·stride elements.
func convolve(dst, src, k []float64, stride, m int) {
	r := len(k) / 2
	for di, w := range k {
		d := di - r
		if d >= m || -d >= m {
			continue
		}
		var lo, hi int // dst range [lo, hi) receives src[lo+d·stride : hi+d·stride]
		if d >= 0 {
			lo, hi = 0, (m-d)*stride
		} else {
			lo, hi = -d*stride, m*stride
		}
		sh := d * stride
		axpy(dst[lo:hi], src[lo+sh:hi+sh], w)
	}
}

func axpy(dst, src []float64, w float64) {
	src = src[:len(dst)]
	i := 0
	for ; i+4 <= len(dst); i += 4 {
		s := src[i : i+4 : i+4]
		d := dst[i : i+4 : i+4]
		d[0] += w * s[0]
		d[1] += w * s[1]
		d[2] += w * s[2]
		d[3] += w * s[3]
	}
	for ; i < len(dst); i++ {
		dst[i] += w * src[i]
	}
}
