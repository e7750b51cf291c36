package design

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"
)

// rankEps is the float64 unit roundoff used by the numerical rank rule.
const rankEps = 2.2e-16

// numRank returns the numerical rank of the columns of a (already scaled to
// unit norm): the number of singular values above max(n,p)·s_max·2.2e−16
// (methods §c.1), with the factorisation for reuse.
func numRank(a mat.Matrix) (int, *mat.SVD) {
	var svd mat.SVD
	if !svd.Factorize(a, mat.SVDThinV) {
		return -1, nil
	}
	s := svd.Values(nil)
	n, p := a.Dims()
	tol := float64(max(n, p)) * s[0] * rankEps
	r := 0
	for _, v := range s {
		if v > tol {
			r++
		}
	}
	return r, &svd
}

// checkRank returns nil when the columns (none all zero, more rows than
// columns) are linearly independent by the numerical rank rule of methods
// §c.1, applied to the columns scaled to unit norm. Otherwise it returns a
// [CollinearError] naming a minimal dependent set: the shortest prefix of
// columns that is rank deficient has a one-dimensional null space, and the
// columns with non-negligible weight in its null vector are exactly the
// columns that depend on each other there.
func checkRank(cols [][]float64, names []string) error {
	p := len(cols)
	n := len(cols[0])
	data := make([]float64, n*p)
	for j, x := range cols {
		nrm := math.Sqrt(dot(x, x))
		for i, v := range x {
			data[i*p+j] = v / nrm
		}
	}
	a := mat.NewDense(n, p, data)
	r, _ := numRank(a)
	if r < 0 {
		return fmt.Errorf("design: the singular value decomposition of the design did not converge")
	}
	if r == p {
		return nil
	}
	// The deficiency of a prefix grows with its length: binary search for
	// the shortest deficient prefix.
	lo, hi := 1, p // prefix lo is full rank, prefix hi is not
	for hi-lo > 1 {
		mid := (lo + hi) / 2
		if rm, _ := numRank(a.Slice(0, n, 0, mid)); rm < mid {
			hi = mid
		} else {
			lo = mid
		}
	}
	_, svd := numRank(a.Slice(0, n, 0, hi))
	var v mat.Dense
	svd.VTo(&v)
	// The smallest singular value's right singular vector spans the null space.
	big := 0.0
	for i := 0; i < hi; i++ {
		big = math.Max(big, math.Abs(v.At(i, hi-1)))
	}
	var dep []string
	for i := 0; i < hi; i++ {
		if math.Abs(v.At(i, hi-1)) > 1e-6*big {
			dep = append(dep, names[i])
		}
	}
	return &CollinearError{Columns: dep}
}
