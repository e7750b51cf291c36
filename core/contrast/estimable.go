package contrast

import (
	"errors"
	"fmt"
	"math"
	"strings"

	"gonum.org/v1/gonum/mat"
)

// Tolerances (see the package comment).
const (
	EstimableTol = 1e-8                  // relative distance from the row space of X
	rankEps      = 2.220446049250313e-16 // machine epsilon of the numerical-rank rule
)

// rowSpace describes the row space of a design X through the SVD of the
// column-scaled design X·D.
type rowSpace struct {
	scale []float64  // D: 1/‖x_j‖, 1 for an all-zero column
	v     *mat.Dense // p x r, orthonormal basis of the row space of X·D
	s     []float64  // the r non-zero singular values of X·D
	null  *mat.Dense // p x (p-r), orthonormal basis of the null space of X (original coordinates); nil if full rank
}

func newRowSpace(x *mat.Dense) (*rowSpace, error) {
	n, p := x.Dims()
	if n == 0 || p == 0 {
		return nil, errors.New("contrast: empty design matrix")
	}
	xs := mat.NewDense(n, p, nil)
	xs.Copy(x)
	scale := make([]float64, p)
	ss := make([]float64, p)
	for i := 0; i < n; i++ {
		row := xs.RawRowView(i)
		for j, v := range row {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return nil, fmt.Errorf("design matrix holds %v in row %d, column %d; want finite values", v, i+1, j+1)
			}
			ss[j] += v * v
		}
	}
	for j := range scale {
		scale[j] = 1
		if ss[j] > 0 {
			scale[j] = 1 / math.Sqrt(ss[j])
		}
	}
	for i := 0; i < n; i++ {
		row := xs.RawRowView(i)
		for j := range row {
			row[j] *= scale[j]
		}
	}
	var svd mat.SVD
	if !svd.Factorize(xs, mat.SVDFullV) {
		return nil, errors.New("contrast: the singular value decomposition of the design did not converge")
	}
	sv := svd.Values(nil)
	var v mat.Dense
	svd.VTo(&v) // p x p
	tol := float64(max(n, p)) * sv[0] * rankEps
	r := 0
	for r < len(sv) && sv[r] > tol {
		r++
	}
	rs := &rowSpace{scale: scale, s: sv[:r]}
	if r > 0 {
		rs.v = mat.DenseCopyOf(v.Slice(0, p, 0, r))
	}
	if r < p {
		// Null space of X·D mapped back: X·(D·u) = 0. Orthonormalise D·N.
		k := p - r
		nd := mat.DenseCopyOf(v.Slice(0, p, r, p))
		for j := 0; j < p; j++ {
			row := nd.RawRowView(j)
			for c := range row {
				row[c] *= scale[j]
			}
		}
		var qr mat.QR
		qr.Factorize(nd)
		var q mat.Dense
		qr.QTo(&q)
		rs.null = mat.DenseCopyOf(q.Slice(0, p, 0, k))
	}
	return rs, nil
}

// residual returns c − (X⁺X)c, the part of c in the null space of X.
func (rs *rowSpace) residual(c []float64) []float64 {
	p := len(c)
	res := make([]float64, p)
	if rs.null == nil {
		return res
	}
	_, k := rs.null.Dims()
	coef := mat.NewVecDense(k, nil)
	coef.MulVec(rs.null.T(), mat.NewVecDense(p, c))
	out := mat.NewVecDense(p, res)
	out.MulVec(rs.null, coef)
	return res
}

func norm(v []float64) float64 {
	var s float64
	for _, x := range v {
		s += x * x
	}
	return math.Sqrt(s)
}

func (c *Contrast) colName(j int) string {
	if j < len(c.Columns) && c.Columns[j] != "" {
		return c.Columns[j]
	}
	return fmt.Sprintf("column %d", j+1)
}

func (c *Contrast) rowLabel(i int) string {
	text := ""
	if i < len(c.Rows) {
		text = fmt.Sprintf(" (%q)", c.Rows[i])
	}
	if !c.IsF() {
		return fmt.Sprintf("contrast %q%s", c.Name, text)
	}
	return fmt.Sprintf("contrast %q, row %d%s,", c.Name, i+1, text)
}

func (c *Contrast) check(x *mat.Dense) (*rowSpace, error) {
	_, p := x.Dims()
	if len(c.Weights) == 0 {
		panic("contrast: contrast has no rows")
	}
	for i, w := range c.Weights {
		if len(w) != p {
			panic(fmt.Sprintf("contrast: row %d has %d weights for a design of %d columns", i+1, len(w), p))
		}
	}
	rs, err := newRowSpace(x)
	if err != nil {
		return nil, err
	}
	for i, w := range c.Weights {
		res := rs.residual(w)
		nc, nres := norm(w), norm(res)
		if nres <= EstimableTol*nc {
			continue
		}
		// res lies in the null space of X: the columns with a sizeable part
		// in it (weighted by the column's norm, so that a column with a large
		// scale is not overlooked) are those the design cannot tell apart.
		inv := make([]float64, p)
		var big float64
		for j, r := range res {
			inv[j] = math.Abs(r) / rs.scale[j]
			big = math.Max(big, inv[j])
		}
		var involved []string
		zeroCol := false
		for j := range res {
			if inv[j] > 1e-6*big {
				involved = append(involved, c.colName(j))
				if columnIsZero(x, j) {
					zeroCol = true
				}
			}
		}
		why := fmt.Sprintf("the design cannot separate the columns %s (one is a combination of the others)", strings.Join(involved, ", "))
		if len(involved) == 1 || zeroCol {
			why = fmt.Sprintf("the design gives no information on %s (an all-zero or redundant column)", strings.Join(involved, ", "))
		}
		return nil, fmt.Errorf("%s is not estimable: %s; its distance from the design's row space is %.3g of its length (tolerance %g); use a combination the design determines, e.g. a difference of the confounded columns",
			c.rowLabel(i), why, nres/nc, EstimableTol)
	}
	return rs, nil
}

func columnIsZero(x *mat.Dense, j int) bool {
	n, _ := x.Dims()
	for i := 0; i < n; i++ {
		if x.At(i, j) != 0 {
			return false
		}
	}
	return true
}

// Estimable checks that every row of c lies in the row space of x (methods
// c.1): ‖c − (X⁺X)c‖ ≤ 1e-8·‖c‖, on the column-scaled design. The error
// names the contrast row and the columns the design cannot separate. A
// weight count that differs from the design's column count is a caller bug
// and panics.
func Estimable(c *Contrast, x *mat.Dense) error {
	_, err := c.check(x)
	return err
}

// Rank returns q* = rank(C (X'X)⁺ C') of the contrast for the design x
// (methods c.3), after checking that it is estimable (same error as
// Estimable). A t contrast has rank 1.
func Rank(c *Contrast, x *mat.Dense) (int, error) {
	rs, err := c.check(x)
	if err != nil {
		return 0, err
	}
	q := len(c.Weights)
	r := len(rs.s)
	if r == 0 {
		return 0, nil
	}
	_, p := x.Dims()
	// B = (C·D)·V_r·S_r⁻¹, q x r; B·B' = C (X'X)⁻ C'.
	cd := mat.NewDense(q, p, nil)
	for i, w := range c.Weights {
		row := cd.RawRowView(i)
		for j := range w {
			row[j] = w[j] * rs.scale[j]
		}
	}
	b := mat.NewDense(q, r, nil)
	b.Mul(cd, rs.v)
	for i := 0; i < q; i++ {
		row := b.RawRowView(i)
		for k := range row {
			row[k] /= rs.s[k]
		}
	}
	var svd mat.SVD
	if !svd.Factorize(b, mat.SVDNone) {
		return 0, errors.New("contrast: the singular value decomposition of the contrast did not converge")
	}
	sv := svd.Values(nil)
	if len(sv) == 0 || sv[0] == 0 {
		return 0, nil
	}
	k := 0
	for k < len(sv) && sv[k] > EstimableTol*sv[0] {
		k++
	}
	return k, nil
}
