package motion

import "math"

// Cubic B-spline interpolation (Unser, Aldroubi and Eden 1993; Unser 1999):
// the samples are turned into B-spline coefficients by a recursive filter with
// pole z = √3 − 2 (gain 6) run causally and anticausally along each axis with
// mirror-symmetric boundaries, and the interpolant is Σ c[k]·β³(x − k).

var splinePole = math.Sqrt(3) - 2

// prefilterAxis turns the samples of c into cubic B-spline coefficients along
// one axis in place. The axis has n points, consecutive points stride apart;
// blocks of n·stride values repeat nblocks times. Each step of the recursion
// runs over a whole contiguous lane of stride values (long loops).
func prefilterAxis(c []float64, n, stride, nblocks int, tmp []float64) {
	if n < 2 {
		return
	}
	z := splinePole
	const gain = 6.0 // (1 − z)(1 − 1/z)
	// Horizon of the causal initialisation: z^k < 1e-12 beyond it.
	horizon := int(math.Ceil(math.Log(1e-12) / math.Log(-z)))
	tmp = tmp[:stride]
	for b := 0; b < nblocks; b++ {
		blk := c[b*n*stride : (b+1)*n*stride]
		for i := range blk {
			blk[i] *= gain
		}
		row := func(m int) []float64 { return blk[m*stride : (m+1)*stride] }
		// Causal initialisation c+[0] = Σ_k z^k s_ext[k] (mirror extension).
		for i := range tmp {
			tmp[i] = 0
		}
		if n > horizon {
			zk := 1.0
			for k := 0; k < horizon; k++ {
				r := row(k)
				for i, v := range r {
					tmp[i] += zk * v
				}
				zk *= z
			}
		} else {
			// Exact sum over one period 2n−2 of the mirrored signal.
			period := 2*n - 2
			zk := 1.0
			for k := 0; k < period; k++ {
				m := k
				if m >= n {
					m = period - k
				}
				r := row(m)
				for i, v := range r {
					tmp[i] += zk * v
				}
				zk *= z
			}
			scale := 1 / (1 - zk) // zk = z^period
			for i := range tmp {
				tmp[i] *= scale
			}
		}
		copy(row(0), tmp)
		for m := 1; m < n; m++ {
			cur, prev := row(m), row(m-1)
			for i := range cur {
				cur[i] += z * prev[i]
			}
		}
		// Anticausal initialisation and recursion.
		last, prev := row(n-1), row(n-2)
		f := z / (z*z - 1)
		for i := range last {
			last[i] = f * (last[i] + z*prev[i])
		}
		for m := n - 2; m >= 0; m-- {
			cur, next := row(m), row(m+1)
			for i := range cur {
				cur[i] = z * (next[i] - cur[i])
			}
		}
	}
}

// prefilter3 computes the cubic B-spline coefficients of a volume in place.
func prefilter3(c []float64, dims [3]int, tmp []float64) {
	nx, ny, nz := dims[0], dims[1], dims[2]
	prefilterAxis(c, nx, 1, ny*nz, tmp)
	prefilterAxis(c, ny, nx, nz, tmp)
	prefilterAxis(c, nz, nx*ny, 1, tmp)
}

// splineWeights returns the cubic B-spline weights of the four neighbours
// floor(x)−1 .. floor(x)+2 for the fractional part t.
func splineWeights(t float64) (w0, w1, w2, w3 float64) {
	u := 1 - t
	t2 := t * t
	t3 := t2 * t
	w0 = u * u * u / 6
	w1 = (4 - 6*t2 + 3*t3) / 6
	w3 = t3 / 6
	w2 = 1 - w0 - w1 - w3
	return
}

// mirror maps an index onto 0..n−1 by mirror symmetry about the end points
// (the boundary the prefilter assumes).
func mirror(i, n int) int {
	if n == 1 {
		return 0
	}
	period := 2*n - 2
	i %= period
	if i < 0 {
		i += period
	}
	if i >= n {
		i = period - i
	}
	return i
}

// splineAt evaluates the cubic B-spline with coefficients c at voxel position
// (x, y, z), clamped to the grid.
func splineAt(c []float64, dims [3]int, x, y, z float64) float64 {
	nx, ny, nz := dims[0], dims[1], dims[2]
	x = clamp(x, float64(nx-1))
	y = clamp(y, float64(ny-1))
	z = clamp(z, float64(nz-1))
	fx, fy, fz := math.Floor(x), math.Floor(y), math.Floor(z)
	var wx, wy, wz [4]float64
	wx[0], wx[1], wx[2], wx[3] = splineWeights(x - fx)
	wy[0], wy[1], wy[2], wy[3] = splineWeights(y - fy)
	wz[0], wz[1], wz[2], wz[3] = splineWeights(z - fz)
	ix, iy, iz := int(fx)-1, int(fy)-1, int(fz)-1
	if ix >= 0 && iy >= 0 && iz >= 0 && ix+3 < nx && iy+3 < ny && iz+3 < nz {
		// Interior: the 4×4×4 neighbourhood needs no mirroring.
		var s float64
		for c3 := 0; c3 < 4; c3++ {
			base := nx * (iy + ny*(iz+c3))
			r0 := c[base+ix : base+ix+4 : base+ix+4]
			r1 := c[base+nx+ix : base+nx+ix+4 : base+nx+ix+4]
			r2 := c[base+2*nx+ix : base+2*nx+ix+4 : base+2*nx+ix+4]
			r3 := c[base+3*nx+ix : base+3*nx+ix+4 : base+3*nx+ix+4]
			sy := wy[0]*(wx[0]*r0[0]+wx[1]*r0[1]+wx[2]*r0[2]+wx[3]*r0[3]) +
				wy[1]*(wx[0]*r1[0]+wx[1]*r1[1]+wx[2]*r1[2]+wx[3]*r1[3]) +
				wy[2]*(wx[0]*r2[0]+wx[1]*r2[1]+wx[2]*r2[2]+wx[3]*r2[3]) +
				wy[3]*(wx[0]*r3[0]+wx[1]*r3[1]+wx[2]*r3[2]+wx[3]*r3[3])
			s += wz[c3] * sy
		}
		return s
	}
	var xi [4]int
	for a := 0; a < 4; a++ {
		xi[a] = mirror(ix+a, nx)
	}
	var s float64
	for c3 := 0; c3 < 4; c3++ {
		kz := mirror(iz+c3, nz) * ny
		var sy float64
		for b := 0; b < 4; b++ {
			row := c[(kz+mirror(iy+b, ny))*nx:]
			sy += wy[b] * (wx[0]*row[xi[0]] + wx[1]*row[xi[1]] + wx[2]*row[xi[2]] + wx[3]*row[xi[3]])
		}
		s += wz[c3] * sy
	}
	return s
}

func clamp(v, hi float64) float64 {
	if v < 0 || v != v {
		return 0
	}
	if v > hi {
		return hi
	}
	return v
}
