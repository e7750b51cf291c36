package glm

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"
)

// prepared is a validated contrast. For F the rows are replaced by an orthonormal basis of
// their row space (q* rows): the F statistic depends on the row space only, and the basis
// makes C(X̃'X̃)⁻¹C' full rank (methods notes §c.3).
type prepared struct {
	orig  [][]float64
	basis [][]float64
	f     bool
}

func prepare(w [][]float64, p int) (*prepared, error) {
	if len(w) == 0 {
		return nil, fmt.Errorf("no weight rows, want at least one")
	}
	for i, r := range w {
		if len(r) != p {
			return nil, fmt.Errorf("row %d has %d weights, want %d (design columns)", i+1, len(r), p)
		}
		nz := false
		for j, v := range r {
			if !finite(v) {
				return nil, fmt.Errorf("row %d, weight %d is %g, want a finite number", i+1, j+1, v)
			}
			nz = nz || v != 0
		}
		if !nz {
			return nil, fmt.Errorf("row %d is all zero, want at least one non-zero weight", i+1)
		}
	}
	c := &prepared{orig: w, f: len(w) > 1}
	if !c.f {
		c.basis = w
		return c, nil
	}
	m := mat.NewDense(len(w), p, nil)
	for i, r := range w {
		m.SetRow(i, r)
	}
	var svd mat.SVD
	if !svd.Factorize(m, mat.SVDThin) {
		return nil, fmt.Errorf("SVD of the weight rows failed")
	}
	sv := svd.Values(nil)
	var vt mat.Dense
	svd.VTo(&vt) // p x k, columns are right singular vectors
	tol := float64(max(len(w), p)) * sv[0] * 2.220446049250313e-16
	for k, s := range sv {
		if s > tol {
			row := make([]float64, p)
			for j := 0; j < p; j++ {
				row[j] = vt.At(j, k)
			}
			c.basis = append(c.basis, row)
		}
	}
	return c, nil
}

func (c *prepared) newStat(nv int, df float64) *Stat {
	st := &Stat{Effect: make([]float64, nv), Stat: make([]float64, nv), F: c.f, DF1: 1, DF2: df}
	if c.f {
		st.DF1 = float64(len(c.basis))
	} else {
		st.SE = make([]float64, nv)
	}
	return st
}

func (st *Stat) setNaN(v int) {
	st.Effect[v], st.Stat[v] = math.NaN(), math.NaN()
	if st.SE != nil {
		st.SE[v] = math.NaN()
	}
}

type scratch struct {
	w      [][]float64 // L⁻¹ r_i
	vq, eq []float64
}

func newScratch(p int) *scratch {
	s := &scratch{}
	s.w = make([][]float64, 0)
	s.grow(1, p)
	return s
}

func (s *scratch) grow(q, p int) {
	for len(s.w) < q {
		s.w = append(s.w, make([]float64, p))
	}
	if len(s.vq) < q*q {
		s.vq, s.eq = make([]float64, q*q), make([]float64, q)
	}
}

// eval writes the contrast at voxel v given the Cholesky factor l of X̃'X̃, β̃ and σ².
func (c *prepared) eval(st *Stat, v int, l []float64, p int, beta []float64, sigma2 float64, sc *scratch) {
	if !c.f {
		r := c.basis[0]
		w := sc.w[0]
		copy(w, r)
		forward(l, p, w)
		eff := dot(r, beta)
		se := math.Sqrt(sigma2 * dot(w, w))
		st.Effect[v], st.SE[v], st.Stat[v] = eff, se, eff/se
		return
	}
	q := len(c.basis)
	sc.grow(q, p)
	for i, r := range c.basis {
		copy(sc.w[i], r)
		forward(l, p, sc.w[i])
		sc.eq[i] = dot(r, beta)
	}
	vq := sc.vq[:q*q]
	for i := 0; i < q; i++ {
		for j := 0; j <= i; j++ {
			vq[i*q+j] = dot(sc.w[i], sc.w[j])
		}
	}
	e := sc.eq[:q]
	num := 0.0
	if cholesky(vq, q) {
		z := make([]float64, q)
		copy(z, e)
		forward(vq, q, z)
		num = dot(z, z)
	} else {
		num = math.NaN()
	}
	st.Stat[v] = num / (float64(q) * sigma2)
	n2 := 0.0
	for _, r := range c.orig {
		x := dot(r, beta)
		n2 += x * x
	}
	st.Effect[v] = math.Sqrt(n2)
}
