package design

import "math"

// NumCosines returns K, the number of discrete cosine drift columns for n
// scans of tr seconds and a cutoff period of cutoffSec seconds: every column
// whose period 2·n·tr/j is at least the cutoff, K = ⌊2·n·tr/cutoff + 1e−9⌋
// (the 1e−9 keeps a column whose period equals the cutoff). cutoffSec ≤ 0
// gives 0. K is capped at n−1, the last distinct non-constant cosine.
func NumCosines(n int, tr, cutoffSec float64) int {
	if n < 2 || !(cutoffSec > 0) || !(tr > 0) {
		return 0
	}
	r := math.Floor(2*float64(n)*tr/cutoffSec + 1e-9)
	if r >= float64(n-1) {
		return n - 1
	}
	return int(r)
}

// Cosine fills dst with the j-th orthonormal DCT-II basis vector over
// n = len(dst) scans (methods §b.1):
//
//	c_j[k] = sqrt(2/n)·cos(π·j·(2k+1)/(2n)),  k = 0..n−1.
//
// Column j completes j/2 cycles over the run.
func Cosine(dst []float64, j int) {
	n := float64(len(dst))
	s := math.Sqrt(2 / n)
	w := math.Pi * float64(j) / (2 * n)
	for k := range dst {
		dst[k] = s * math.Cos(w*float64(2*k+1))
	}
}
