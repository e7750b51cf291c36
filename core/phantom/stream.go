package phantom

import (
	"fmt"
	"io"
	"math"
	"math/rand/v2"
)

// gaussKernel is a sampled Gaussian of standard deviation sigma (voxels)
// with half-width radius, normalised to sum 1.
func gaussKernel(sigma float64, radius int) []float32 {
	k := make([]float64, 2*radius+1)
	sum := 0.0
	for d := -radius; d <= radius; d++ {
		w := math.Exp(-float64(d*d) / (2 * sigma * sigma))
		k[d+radius] = w
		sum += w
	}
	out := make([]float32, len(k))
	for i, w := range k {
		out[i] = float32(w / sum)
	}
	return out
}

// zEdgeSums gives, per slice, the sum of the kernel weights (squared
// weights when squared is true) that fall inside the grid along z.
func zEdgeSums(k []float32, squared bool) []float64 {
	r := len(k) / 2
	out := make([]float64, nz)
	for kk := range out {
		for d := -r; d <= r; d++ {
			if kk+d < 0 || kk+d >= nz {
				continue
			}
			w := float64(k[d+r])
			if squared {
				w *= w
			}
			out[kk] += w
		}
	}
	return out
}

// convAxis writes the 1D convolution of src with the symmetric kernel k
// along the axis of the given stride into dst. The interior is one long loop
// over the whole volume with all taps at once; along x and y the shifted
// index runs on into the next row or slice, which touches only voxels within
// the kernel's radius of the grid's faces (background in this phantom).
// Along z, and at the two ends of the array, the kernel is truncated.
func convAxis(dst, src []float32, k []float32, stride int) {
	n := len(src)
	r := len(k) / 2
	edge := r * stride
	if r != 3 || n < 2*edge {
		convAxisTaps(dst, src, k, stride, 0, n)
		return
	}
	k0, k1, k2, k3 := k[3], k[4], k[5], k[6]
	m := n - 2*edge
	d := dst[edge : edge+m]
	c := src[edge : edge+m]
	a1, b1 := src[edge-stride:edge-stride+m], src[edge+stride:edge+stride+m]
	a2, b2 := src[edge-2*stride:edge-2*stride+m], src[edge+2*stride:edge+2*stride+m]
	a3, b3 := src[0:m], src[edge+3*stride:edge+3*stride+m]
	c, a1, b1, a2, b2, a3, b3 = c[:len(d)], a1[:len(d)], b1[:len(d)], a2[:len(d)], b2[:len(d)], a3[:len(d)], b3[:len(d)]
	for v := range d {
		d[v] = k0*c[v] + k1*(a1[v]+b1[v]) + k2*(a2[v]+b2[v]) + k3*(a3[v]+b3[v])
	}
	convAxisTaps(dst, src, k, stride, 0, edge)
	convAxisTaps(dst, src, k, stride, n-edge, n)
}

// convAxisTaps is convAxis for the output range [from, to), one tap at a
// time, leaving out taps that fall off the array.
func convAxisTaps(dst, src []float32, k []float32, stride, from, to int) {
	n := len(src)
	r := len(k) / 2
	clear(dst[from:to])
	for d := -r; d <= r; d++ {
		w := k[d+r]
		off := d * stride
		lo, hi := max(from, -off), min(to, n-off)
		if lo >= hi {
			continue
		}
		dd := dst[lo:hi]
		ss := src[lo+off : hi+off]
		for v := range dd {
			dd[v] += w * ss[v]
		}
	}
}

// smooth3 blurs src into dst with the separable kernel k; tmp is scratch.
// src is left unchanged only if it is not dst or tmp.
func smooth3(dst, src, tmp []float32, k []float32) {
	convAxis(dst, src, k, 1)
	convAxis(tmp, dst, k, nx)
	convAxis(dst, tmp, k, nx*ny)
}

// Stream produces the scenario's volumes in time order.
type Stream struct {
	s      *Scenario
	src    *rand.PCG
	t      int
	kernel []float32
	white  []float32
	sm     []float32
	tmp    []float32
	ar     []float32 // the AR(1) noise state, unit variance
	bg     []float32 // two normal deviates per background voxel
}

// Stream starts a fresh pass over the volumes; every Stream of a Scenario
// yields the same volumes.
func (s *Scenario) Stream() *Stream {
	n := nx * ny * nz
	return &Stream{
		s:      s,
		src:    rand.NewPCG(s.Seed, 0x6e6f697365), // stream "noise"
		kernel: gaussKernel(noiseFWHMVox/(2*math.Sqrt(2*math.Ln2)), noiseRadius),
		white:  make([]float32, n),
		sm:     make([]float32, n),
		tmp:    make([]float32, n),
		ar:     make([]float32, n),
		bg:     make([]float32, 2*len(s.background)),
	}
}

// normalTableBits sets the size of the inverse-CDF table of the standard
// normal: 2^16 entries, so one 64-bit PCG draw yields four deviates.
const normalTableBits = 16

// normalTable holds Φ⁻¹((i + 0.5)/2^16) for i = 0..2^16−1, rescaled to unit
// variance. Drawing an entry uniformly gives a normal deviate truncated
// at ±4.3 (the outermost quantiles), which spatial smoothing then turns
// into noise that is Gaussian for practical purposes; it costs one table
// load instead of a ziggurat step with its own generator call, which
// matters under WebAssembly.
type normalTable [1 << normalTableBits]float32

func newNormalTable() *normalTable {
	var t normalTable
	n := float64(len(t))
	ss := 0.0
	z := make([]float64, len(t))
	for i := range z {
		z[i] = math.Sqrt2 * math.Erfinv(2*(float64(i)+0.5)/n-1)
		ss += z[i] * z[i]
	}
	f := math.Sqrt(n / ss)
	for i := range z {
		t[i] = float32(z[i] * f)
	}
	return &t
}

// fillNormal fills dst with normal deviates, four per PCG draw.
func (st *Stream) fillNormal(dst []float32) {
	tbl := st.s.normal
	const mask = 1<<normalTableBits - 1
	i := 0
	for ; i+4 <= len(dst); i += 4 {
		u := st.src.Uint64()
		d := dst[i : i+4 : i+4]
		d[0] = tbl[u&mask]
		d[1] = tbl[(u>>16)&mask]
		d[2] = tbl[(u>>32)&mask]
		d[3] = tbl[(u>>48)&mask]
	}
	if i < len(dst) {
		u := st.src.Uint64()
		for ; i < len(dst); i++ {
			dst[i] = tbl[u&mask]
			u >>= 16
		}
	}
}

// Next fills dst (nx·ny·nz values, x fastest) with the next volume and
// returns io.EOF after the last one. Values are whole numbers within the
// int16 range.
func (st *Stream) Next(dst []float32) error {
	s := st.s
	n := nx * ny * nz
	if len(dst) != n {
		panic(fmt.Sprintf("phantom: Next got a slice of %d values, want %d", len(dst), n))
	}
	if st.t >= s.Volumes {
		return io.EOF
	}
	t := st.t
	st.t++

	// Spatially smooth unit-variance noise, then AR(1) in time.
	st.fillNormal(st.white)
	smooth3(st.sm, st.white, st.tmp, st.kernel)
	if t == 0 {
		copy(st.ar, st.sm) // the stationary start
	} else {
		rho := float32(noiseRho)
		c := float32(math.Sqrt(1 - noiseRho*noiseRho))
		ar, sm := st.ar, st.sm[:len(st.ar)]
		for v := range ar {
			ar[v] = rho*ar[v] + c*sm[v]
		}
	}

	// Baseline, drift, motion-linked intensity and noise.
	dt, mt := float32(s.drift[t]), float32(s.motion[t])
	base, dm, mm, ns, ar := s.base, s.driftMap[:n], s.motionMap[:n], s.noiseScale[:n], st.ar[:n]
	out := dst[:n]
	for v := range out {
		out[v] = base[v] + dt*dm[v] + mt*mm[v] + ns[v]*ar[v]
	}

	// Planted responses.
	for b := range s.Blobs {
		bl := &s.Blobs[b]
		for c, name := range s.Conditions {
			x := s.reg[name][t] * bl.Percent[c] / 100
			if x == 0 {
				continue
			}
			xf := float32(x)
			for _, v := range bl.idx {
				out[v] += xf * base[v]
			}
		}
	}

	// Rician background: the magnitude of the (blurred) baseline plus
	// complex Gaussian noise.
	st.fillNormal(st.bg)
	sg := float32(bgSigma)
	bgn := st.bg[:2*len(s.background)]
	for q, v := range s.background {
		re := base[v] + sg*bgn[2*q]
		im := sg * bgn[2*q+1]
		out[v] = float32(math.Sqrt(float64(re*re + im*im)))
	}

	// The export is int16: whole numbers (halves rounded up) in range.
	for v, x := range out {
		r := math.Floor(float64(x) + 0.5)
		if r > math.MaxInt16 {
			r = math.MaxInt16
		} else if r < math.MinInt16 {
			r = math.MinInt16
		}
		out[v] = float32(r)
	}
	return nil
}
