package group

import (
	"errors"
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"
)

// Scheme says what is exchanged under the null hypothesis.
type Scheme int

const (
	SignFlips    Scheme = iota + 1 // errors symmetric about zero: each subject's map may change sign
	Permutations                   // errors exchangeable: subjects' rows are permuted
)

// String returns "sign-flips" or "permutations".
func (s Scheme) String() string {
	switch s {
	case SignFlips:
		return "sign-flips"
	case Permutations:
		return "permutations"
	}
	return fmt.Sprintf("Scheme(%d)", int(s))
}

// Model is the permutation setup of one contrast on one design (see the package
// documentation).
type Model struct {
	N      int     // subjects (design rows)
	P      int     // design columns
	DF     float64 // error degrees of freedom ν = N − P
	F      bool    // an F contrast (several rows)
	Q      int     // rank of the contrast: numerator degrees of freedom of F, 1 for t
	Scheme Scheme
	// Nuisance is the rank of the reduced model Z = X·null(C).
	Nuisance int

	r         int       // rank of X (= P)
	u         []float64 // N×r row-major orthonormal basis of span(X)
	invariant bool      // column 0 of u is the constant 1/√N and is left alone by permutations
	k         []float64 // statistic weights on m: 1×r (t, unit norm) or Q×r orthonormal rows (F)
	g         []float64 // rows(C)×r: effect rows, Cβ̂ = G m
	rows      int       // rows of C
	resid     []float64 // N×N residual-forming matrix I − P_Z of the reduced model (nil: identity)
	class     []int     // design-row class of each subject, numbered by first appearance
	counts    []int     // subjects per class
	rep       []int     // a subject of each class
}

// Tolerances of the model set-up.
const (
	rankTol     = 1e-10 // singular values below rankTol·s_max·max(n, p) count as zero
	constantTol = 1e-8  // the constant lies in span(Z) when ‖(I − P_Z)1‖ ≤ constantTol·√n
)

// ErrRankDeficient reports a design whose columns are linearly dependent.
var ErrRankDeficient = errors.New("the design is rank-deficient")

// NewModel sets up contrast c (rows × design columns) on design x (subjects × columns). The
// design must have full column rank and more rows than columns.
func NewModel(x *mat.Dense, c [][]float64) (*Model, error) {
	n, p := x.Dims()
	if len(c) == 0 {
		panic("group: contrast has no rows")
	}
	for _, row := range c {
		if len(row) != p {
			panic(fmt.Sprintf("group: contrast row has %d weights, design %d columns", len(row), p))
		}
	}
	for i := range n {
		for j := range p {
			if v := x.At(i, j); math.IsNaN(v) || math.IsInf(v, 0) {
				return nil, fmt.Errorf("design row %d, column %d is %g; want a finite number", i+1, j+1, v)
			}
		}
	}
	if n <= p {
		return nil, fmt.Errorf("%d subjects for a model of %d columns; want at least %d (one more than the columns, for the error degrees of freedom)", n, p, p+1)
	}
	var svd mat.SVD
	if !svd.Factorize(x, mat.SVDThin) {
		return nil, errors.New("group: the SVD of the design did not converge")
	}
	s := svd.Values(nil)
	r := numRank(s, n, p)
	if r < p {
		return nil, fmt.Errorf("%w: %d columns have rank %d; want linearly independent columns (a column repeats, is constant alongside a constant column, or is a sum of others)", ErrRankDeficient, p, r)
	}
	m := &Model{N: n, P: p, DF: float64(n - p), r: p, rows: len(c)}
	var ux, v mat.Dense
	svd.UTo(&ux) // n×p
	svd.VTo(&v)  // p×p

	// C X⁺ = C V S⁻¹ U_X'.
	cm := mat.NewDense(len(c), p, nil)
	for i, row := range c {
		cm.SetRow(i, row)
	}
	var cvs mat.Dense
	cvs.Mul(cm, &v)
	for j := range p {
		for i := range len(c) {
			cvs.Set(i, j, cvs.At(i, j)/s[j])
		}
	}

	// The reduced model Z = X·null(C).
	var csvd mat.SVD
	if !csvd.Factorize(cm, mat.SVDFull) {
		return nil, errors.New("group: the SVD of the contrast did not converge")
	}
	cs := csvd.Values(nil)
	q := 0
	for _, sv := range cs {
		if sv > 1e-8*cs[0] {
			q++
		}
	}
	if q == 0 {
		return nil, errors.New("the contrast has no non-zero weight")
	}
	m.Q = q
	m.F = len(c) > 1
	var cv mat.Dense
	csvd.VTo(&cv) // p×p; columns q.. span null(C)
	one := make([]float64, n)
	for i := range one {
		one[i] = 1
	}
	resOne := one
	if q < p {
		var z mat.Dense
		z.Mul(x, cv.Slice(0, p, q, p))
		var zsvd mat.SVD
		if !zsvd.Factorize(&z, mat.SVDThin) {
			return nil, errors.New("group: the SVD of the reduced model did not converge")
		}
		zs := zsvd.Values(nil)
		rz := numRank(zs, n, p-q)
		m.Nuisance = rz
		var uz mat.Dense
		zsvd.UTo(&uz)
		qz := uz.Slice(0, n, 0, rz)
		var pz mat.Dense
		pz.Mul(qz, qz.T())
		m.resid = make([]float64, n*n)
		for i := range n {
			for j := range n {
				d := 0.0
				if i == j {
					d = 1
				}
				m.resid[i*n+j] = d - pz.At(i, j)
			}
		}
		resOne = make([]float64, n)
		for i := range n {
			for j := range n {
				resOne[i] += m.resid[i*n+j]
			}
		}
	}
	if norm(resOne) <= constantTol*math.Sqrt(float64(n)) {
		m.Scheme = Permutations
	} else {
		m.Scheme = SignFlips
	}

	// The basis U: under permutations its first column is the constant (which lies in
	// span(Z) ⊆ span(X)), the rest an orthonormal basis of the complement within span(X).
	u := mat.NewDense(n, p, nil)
	if m.Scheme == Permutations {
		m.invariant = true
		u0 := 1 / math.Sqrt(float64(n))
		w := mat.NewDense(n, p, nil)
		for j := range p {
			dot := 0.0
			for i := range n {
				dot += u0 * ux.At(i, j)
			}
			for i := range n {
				w.Set(i, j, ux.At(i, j)-dot*u0)
			}
		}
		var wsvd mat.SVD
		if !wsvd.Factorize(w, mat.SVDThin) {
			return nil, errors.New("group: the SVD of the design basis did not converge")
		}
		var uw mat.Dense
		wsvd.UTo(&uw)
		for i := range n {
			u.Set(i, 0, u0)
			for j := 1; j < p; j++ {
				u.Set(i, j, uw.At(i, j-1))
			}
		}
	} else {
		u.Copy(&ux)
	}
	m.u = make([]float64, 0, n*p)
	for i := range n {
		m.u = append(m.u, u.RawRowView(i)...)
	}

	// G = C V S⁻¹ U_X' U (rows × r).
	var uxu, g mat.Dense
	uxu.Mul(ux.T(), u)
	g.Mul(&cvs, &uxu)
	m.g = make([]float64, len(c)*p)
	for i := range len(c) {
		for j := range p {
			m.g[i*p+j] = g.At(i, j)
		}
	}
	if !m.F {
		nrm := norm(m.g)
		m.k = make([]float64, p)
		for j := range p {
			m.k[j] = m.g[j] / nrm
		}
	} else {
		var gsvd mat.SVD
		if !gsvd.Factorize(&g, mat.SVDFull) {
			return nil, errors.New("group: the SVD of the contrast basis did not converge")
		}
		var gv mat.Dense
		gsvd.VTo(&gv) // r×r
		m.k = make([]float64, q*p)
		for l := range q {
			for j := range p {
				m.k[l*p+j] = gv.At(j, l)
			}
		}
	}

	// Row classes for unique permutations.
	m.class = make([]int, n)
	var reps []int
	for i := range n {
		m.class[i] = -1
		for c, rep := range reps {
			if sameRow(x, i, rep) {
				m.class[i] = c
				break
			}
		}
		if m.class[i] < 0 {
			m.class[i] = len(reps)
			reps = append(reps, i)
		}
	}
	m.counts = make([]int, len(reps))
	for _, c := range m.class {
		m.counts[c]++
	}
	m.rep = m.classRep()
	return m, nil
}

// Basis returns the orthonormal basis U of span(X), N×P row-major (a copy).
func (m *Model) Basis() []float64 { return append([]float64(nil), m.u...) }

func sameRow(x *mat.Dense, a, b int) bool {
	_, p := x.Dims()
	for j := range p {
		if x.At(a, j) != x.At(b, j) {
			return false
		}
	}
	return true
}

func numRank(s []float64, n, p int) int {
	if len(s) == 0 || s[0] == 0 {
		return 0
	}
	tol := rankTol * s[0] * float64(max(n, p))
	r := 0
	for _, v := range s {
		if v > tol {
			r++
		}
	}
	return r
}

func norm(x []float64) float64 {
	s := 0.0
	for _, v := range x {
		s += v * v
	}
	return math.Sqrt(s)
}
