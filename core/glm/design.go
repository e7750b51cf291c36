package glm

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"
)

// design holds the design-only quantities, computed once in O(n p²) (methods notes §d.3, §d.4).
type design struct {
	n, p     int
	sxx      []float64 // Σ x_t x_t'             (p x p, row-major)
	p1       []float64 // Σ_{t≥2} x_t x_{t−1}'
	p2       []float64 // Σ_{t≥3} x_t x_{t−2}'
	q1       []float64 // P1 + P1'
	q2       []float64 // x1 x1' + xn xn'
	x1, xn   []float64 // first and last rows
	sx       []float64 // Σ_t x_t
	cholSxx  []float64 // lower Cholesky factor of Sxx
	m        [2][2]float64
	minv     [2][2]float64
	hasConst bool      // the constant vector lies in the column space of X
	cconst   []float64 // X cconst = 1 when hasConst: adds the first sample back to β
}

// newDesign checks the design (finite, no zero column, full column rank, more rows than
// columns) and precomputes the design sums, the Cholesky factor of Sxx and the bias matrix M.
func newDesign(x []float64, n, p int) (*design, error) {
	if n <= p {
		return nil, fmt.Errorf("glm: design has %d rows (volumes), want more than its %d columns", n, p)
	}
	for t := 0; t < n; t++ {
		for j := 0; j < p; j++ {
			if v := x[t*p+j]; !finite(v) {
				return nil, fmt.Errorf("glm: design row %d, column %d is %g, want a finite number", t, j, v)
			}
		}
	}
	scaled := mat.NewDense(n, p, nil)
	for j := 0; j < p; j++ {
		norm := 0.0
		for t := 0; t < n; t++ {
			norm += x[t*p+j] * x[t*p+j]
		}
		if norm == 0 {
			return nil, fmt.Errorf("glm: design column %d is all zero, want a non-zero column", j)
		}
		norm = math.Sqrt(norm)
		for t := 0; t < n; t++ {
			scaled.Set(t, j, x[t*p+j]/norm)
		}
	}
	var svd mat.SVD
	if !svd.Factorize(scaled, mat.SVDNone) {
		return nil, fmt.Errorf("glm: design matrix SVD failed")
	}
	sv := svd.Values(nil)
	tol := float64(max(n, p)) * sv[0] * 2.220446049250313e-16 // numerical rank rule (methods §c.1)
	rank := 0
	for _, s := range sv {
		if s > tol {
			rank++
		}
	}
	if rank < p {
		return nil, fmt.Errorf("glm: design matrix has rank %d, want full column rank %d (some columns are linear combinations of others)", rank, p)
	}

	d := &design{n: n, p: p}
	pp := p * p
	d.sxx, d.p1, d.p2 = make([]float64, pp), make([]float64, pp), make([]float64, pp)
	d.q1, d.q2 = make([]float64, pp), make([]float64, pp)
	d.x1 = append([]float64(nil), x[:p]...)
	d.xn = append([]float64(nil), x[(n-1)*p:n*p]...)
	d.sx = make([]float64, p)
	for t := 0; t < n; t++ {
		xt := x[t*p : (t+1)*p]
		for j := 0; j < p; j++ {
			d.sx[j] += xt[j]
			for k := 0; k < p; k++ {
				d.sxx[j*p+k] += xt[j] * xt[k]
			}
		}
		if t >= 1 {
			xm := x[(t-1)*p : t*p]
			for j := 0; j < p; j++ {
				for k := 0; k < p; k++ {
					d.p1[j*p+k] += xt[j] * xm[k]
				}
			}
		}
		if t >= 2 {
			xm := x[(t-2)*p : (t-1)*p]
			for j := 0; j < p; j++ {
				for k := 0; k < p; k++ {
					d.p2[j*p+k] += xt[j] * xm[k]
				}
			}
		}
	}
	for j := 0; j < p; j++ {
		for k := 0; k < p; k++ {
			d.q1[j*p+k] = d.p1[j*p+k] + d.p1[k*p+j]
			d.q2[j*p+k] = d.x1[j]*d.x1[k] + d.xn[j]*d.xn[k]
		}
	}
	d.cholSxx = append([]float64(nil), d.sxx...)
	if !cholesky(d.cholSxx, p) {
		return nil, fmt.Errorf("glm: design cross-product matrix is not positive definite")
	}

	// A = Sxx⁻¹, column by column.
	A := make([]float64, pp)
	e := make([]float64, p)
	for j := 0; j < p; j++ {
		clear(e)
		e[j] = 1
		cholSolve(d.cholSxx, p, e)
		for k := 0; k < p; k++ {
			A[k*p+j] = e[k]
		}
	}
	mul := func(a, b []float64, bT bool) []float64 {
		c := make([]float64, pp)
		for i := 0; i < p; i++ {
			for k := 0; k < p; k++ {
				aik := a[i*p+k]
				for j := 0; j < p; j++ {
					if bT {
						c[i*p+j] += aik * b[j*p+k]
					} else {
						c[i*p+j] += aik * b[k*p+j]
					}
				}
			}
		}
		return c
	}
	trace := func(a []float64) float64 {
		s := 0.0
		for i := 0; i < p; i++ {
			s += a[i*p+i]
		}
		return s
	}
	trProd := func(a, b []float64) float64 { // tr(a b)
		s := 0.0
		for i := 0; i < p; i++ {
			for k := 0; k < p; k++ {
				s += a[i*p+k] * b[k*p+i]
			}
		}
		return s
	}
	quad := func(v []float64) float64 {
		s := 0.0
		for i := 0; i < p; i++ {
			for k := 0; k < p; k++ {
				s += v[i] * A[i*p+k] * v[k]
			}
		}
		return s
	}
	ap1 := mul(A, d.p1, false)
	ap1t := mul(A, d.p1, true)
	ap2 := mul(A, d.p2, false)
	fn, fp := float64(n), float64(p)
	trRS := -trace(ap1)
	trRSRS := -2*trace(ap2) + trProd(ap1, ap1)
	trRSRSt := (fn - 1) - (fp - quad(d.x1)) - (fp - quad(d.xn)) + trProd(ap1, ap1t)
	d.m = [2][2]float64{{fn - fp, 2 * trRS}, {trRS, trRSRS + trRSRSt}}
	det := d.m[0][0]*d.m[1][1] - d.m[0][1]*d.m[1][0]
	if !(math.Abs(det) > 0) {
		return nil, fmt.Errorf("glm: autocorrelation bias matrix is singular")
	}
	d.minv = [2][2]float64{{d.m[1][1] / det, -d.m[0][1] / det}, {-d.m[1][0] / det, d.m[0][0] / det}}

	// Is the constant in the column space? Residual of regressing 1 on X.
	c := append([]float64(nil), d.sx...)
	cholSolve(d.cholSxx, p, c)
	res := 0.0
	for t := 0; t < n; t++ {
		f := 1.0
		for j := 0; j < p; j++ {
			f -= x[t*p+j] * c[j]
		}
		res += f * f
	}
	d.hasConst = res <= 1e-10*fn
	if d.hasConst {
		d.cconst = c
	} else {
		d.cconst = make([]float64, p)
	}
	return d, nil
}

// gram returns X̃'X̃ for Prais–Winsten whitening with ρ (lower triangle used):
// (1+ρ²) Sxx − ρ (P1 + P1') − ρ² (x1x1' + xn xn').
func (d *design) gram(dst []float64, rho float64) {
	a, r2 := 1+rho*rho, rho*rho
	for i := range dst[:d.p*d.p] {
		dst[i] = a*d.sxx[i] - rho*d.q1[i] - r2*d.q2[i]
	}
}

// cholesky overwrites the lower triangle of the p x p row-major matrix a with its Cholesky
// factor L (a = L L'); it reports false when a is not positive definite.
func cholesky(a []float64, p int) bool {
	for j := 0; j < p; j++ {
		rj := a[j*p : j*p+j+1]
		s := rj[j] - dot(rj[:j], rj[:j])
		if !(s > 0) {
			return false
		}
		ljj := math.Sqrt(s)
		rj[j] = ljj
		for i := j + 1; i < p; i++ {
			ri := a[i*p : i*p+j+1]
			ri[j] = (ri[j] - dot(ri[:j], rj[:j])) / ljj
		}
	}
	return true
}

// forward solves L w = b in place (L lower, row-major p x p).
func forward(l []float64, p int, b []float64) {
	for i := 0; i < p; i++ {
		ri := l[i*p : i*p+i+1]
		b[i] = (b[i] - dot(ri[:i], b[:i])) / ri[i]
	}
}

// backward solves L' w = b in place, column by column of L' (rows of L: contiguous).
func backward(l []float64, p int, b []float64) {
	for i := p - 1; i >= 0; i-- {
		ri := l[i*p : i*p+i+1]
		b[i] /= ri[i]
		axpy(b[:i], ri[:i], -b[i])
	}
}

// cholSolve solves (L L') w = b in place.
func cholSolve(l []float64, p int, b []float64) {
	forward(l, p, b)
	backward(l, p, b)
}

// dot is Σ a_i b_i, summed in order; unrolled by 4 because Go's WebAssembly output pays a
// dispatch per loop iteration.
func dot(a, b []float64) float64 {
	b = b[:len(a)]
	s := 0.0
	i := 0
	for ; i+4 <= len(a); i += 4 {
		aa := (*[4]float64)(a[i : i+4])
		bb := (*[4]float64)(b[i : i+4])
		s += aa[0] * bb[0]
		s += aa[1] * bb[1]
		s += aa[2] * bb[2]
		s += aa[3] * bb[3]
	}
	for ; i < len(a); i++ {
		s += a[i] * b[i]
	}
	return s
}

// axpy: d += c·x, unrolled by 4.
func axpy(d, x []float64, c float64) {
	x = x[:len(d)]
	i := 0
	for ; i+4 <= len(d); i += 4 {
		dd := (*[4]float64)(d[i : i+4])
		xx := (*[4]float64)(x[i : i+4])
		dd[0] += c * xx[0]
		dd[1] += c * xx[1]
		dd[2] += c * xx[2]
		dd[3] += c * xx[3]
	}
	for ; i < len(d); i++ {
		d[i] += c * x[i]
	}
}
