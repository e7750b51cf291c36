package nifti

import (
	"errors"
	"fmt"
	"math"
)

// Grid is the spatial part of an image: its voxel grid and the map from
// 0-based voxel indices (i, j, k) to world coordinates in mm. The qform and
// sform fields are kept (in mm) so that a writer can copy them.
type Grid struct {
	Dims    [3]int        // nx, ny, nz
	VoxelMM [3]float64    // spacing along each array axis, mm: |pixdim[1..3]| (a zero pixdim: the affine's column norm)
	Affine  [4][4]float64 // rows; voxel (i, j, k, 1) -> world mm

	QformCode, SformCode                                       int
	QuaternB, QuaternC, QuaternD, QOffsetX, QOffsetY, QOffsetZ float64       // offsets in mm
	Qfac                                                       float64       // pixdim[0]: -1 or 1 (0 read as 1)
	Srow                                                       [3][4]float64 // mm
}

// Voxels returns nx*ny*nz.
func (g Grid) Voxels() int { return g.Dims[0] * g.Dims[1] * g.Dims[2] }

// Index returns the linear index i + nx*(j + ny*k) of a 0-based voxel. It
// panics if the voxel is outside the grid.
func (g Grid) Index(i, j, k int) int {
	if i < 0 || j < 0 || k < 0 || i >= g.Dims[0] || j >= g.Dims[1] || k >= g.Dims[2] {
		panic(fmt.Sprintf("nifti: Index(%d, %d, %d) outside grid %v", i, j, k, g.Dims))
	}
	return i + g.Dims[0]*(j+g.Dims[1]*k)
}

// World maps 0-based voxel coordinates to world mm through Affine.
func (g Grid) World(i, j, k float64) [3]float64 {
	a := &g.Affine
	var w [3]float64
	for r := range w {
		w[r] = a[r][0]*i + a[r][1]*j + a[r][2]*k + a[r][3]
	}
	return w
}

// SameSpace reports whether o has the same dims and an affine equal to g's
// within 1e-4 mm in every entry.
func (g Grid) SameSpace(o Grid) bool {
	if g.Dims != o.Dims {
		return false
	}
	for r := range 4 {
		for c := range 4 {
			if !(math.Abs(g.Affine[r][c]-o.Affine[r][c]) <= 1e-4) {
				return false
			}
		}
	}
	return true
}

// ErrSingular is returned by Grid.Inverse for an affine without an inverse.
var ErrSingular = errors.New("nifti: affine is singular")

// Inverse returns the inverse of Affine, mapping world mm to 0-based voxel
// coordinates. It returns ErrSingular when the 3x3 part has a zero or
// non-finite determinant.
func (g Grid) Inverse() ([4][4]float64, error) {
	a := &g.Affine
	// cofactor inverse of the 3x3 linear part
	c00 := a[1][1]*a[2][2] - a[1][2]*a[2][1]
	c01 := a[1][2]*a[2][0] - a[1][0]*a[2][2]
	c02 := a[1][0]*a[2][1] - a[1][1]*a[2][0]
	det := a[0][0]*c00 + a[0][1]*c01 + a[0][2]*c02
	if det == 0 || math.IsNaN(det) || math.IsInf(det, 0) {
		return [4][4]float64{}, ErrSingular
	}
	var m [4][4]float64
	m[0][0] = c00 / det
	m[1][0] = c01 / det
	m[2][0] = c02 / det
	m[0][1] = (a[0][2]*a[2][1] - a[0][1]*a[2][2]) / det
	m[1][1] = (a[0][0]*a[2][2] - a[0][2]*a[2][0]) / det
	m[2][1] = (a[0][1]*a[2][0] - a[0][0]*a[2][1]) / det
	m[0][2] = (a[0][1]*a[1][2] - a[0][2]*a[1][1]) / det
	m[1][2] = (a[0][2]*a[1][0] - a[0][0]*a[1][2]) / det
	m[2][2] = (a[0][0]*a[1][1] - a[0][1]*a[1][0]) / det
	for r := range 3 {
		m[r][3] = -(m[r][0]*a[0][3] + m[r][1]*a[1][3] + m[r][2]*a[2][3])
	}
	m[3][3] = 1
	return m, nil
}

// Affine returns the voxel-to-world matrix in mm: from the sform when
// sform_code > 0, else from the qform when qform_code > 0, else
// diag(pixdim[1], pixdim[2], pixdim[3], 1). Lengths are converted from
// xyzt_units to mm (no unit: mm).
func (h *Header) Affine() [4][4]float64 {
	var a [4][4]float64
	switch {
	case h.SformCode > 0:
		for r := range 3 {
			a[r] = h.Srow[r]
		}
	case h.QformCode > 0:
		a = quaternAffine(h.QuaternB, h.QuaternC, h.QuaternD, h.QOffsetX, h.QOffsetY, h.QOffsetZ,
			[3]float64{h.Pixdim[1], h.Pixdim[2], h.Pixdim[3]}, h.Pixdim[0])
	default:
		a[0][0], a[1][1], a[2][2] = h.Pixdim[1], h.Pixdim[2], h.Pixdim[3]
	}
	s := spaceScale(h.XYZTUnits)
	for r := range 3 {
		for c := range 4 {
			a[r][c] *= s
		}
	}
	a[3] = [4]float64{0, 0, 0, 1}
	return a
}

// Grid returns the spatial part of the header, with lengths in mm.
func (h *Header) Grid() Grid {
	s := spaceScale(h.XYZTUnits)
	g := Grid{
		Dims:      [3]int{int(h.dim(1)), int(h.dim(2)), int(h.dim(3))},
		Affine:    h.Affine(),
		QformCode: h.QformCode,
		SformCode: h.SformCode,
		QuaternB:  h.QuaternB,
		QuaternC:  h.QuaternC,
		QuaternD:  h.QuaternD,
		QOffsetX:  h.QOffsetX * s,
		QOffsetY:  h.QOffsetY * s,
		QOffsetZ:  h.QOffsetZ * s,
		Qfac:      qfac(h.Pixdim[0]),
	}
	for r := range 3 {
		for c := range 4 {
			g.Srow[r][c] = h.Srow[r][c] * s
		}
	}
	for c := range 3 {
		n := math.Abs(h.Pixdim[c+1]) * s
		if n == 0 {
			n = math.Sqrt(g.Affine[0][c]*g.Affine[0][c] + g.Affine[1][c]*g.Affine[1][c] + g.Affine[2][c]*g.Affine[2][c])
		}
		g.VoxelMM[c] = n
	}
	return g
}

// qfac returns -1 for a negative pixdim[0] and 1 otherwise (0 is read as 1).
func qfac(p0 float64) float64 {
	if p0 < 0 {
		return -1
	}
	return 1
}

// quaternRotation returns the rotation matrix of the unit quaternion
// (a, b, c, d) with a = sqrt(max(0, 1 - b² - c² - d²)); if b² + c² + d²
// exceeds 1, a is 0 and (b, c, d) is normalised. Formula as described in
// the NIfTI-1 header (nifti1.h, "METHOD 2").
func quaternRotation(b, c, d float64) [3][3]float64 {
	var a float64
	if s := b*b + c*c + d*d; s > 1 {
		r := math.Sqrt(s)
		b, c, d = b/r, c/r, d/r
	} else {
		a = math.Sqrt(max(0, 1-s))
	}
	return [3][3]float64{
		{a*a + b*b - c*c - d*d, 2 * (b*c - a*d), 2 * (b*d + a*c)},
		{2 * (b*c + a*d), a*a + c*c - b*b - d*d, 2 * (c*d - a*b)},
		{2 * (b*d - a*c), 2 * (c*d + a*b), a*a + d*d - b*b - c*c},
	}
}

// quaternAffine returns R · diag(p1, p2, qfac·p3) with the offsets in the
// last column, qfac = ±1 from pixdim[0] (0 read as 1).
func quaternAffine(b, c, d, qx, qy, qz float64, pix [3]float64, p0 float64) [4][4]float64 {
	R := quaternRotation(b, c, d)
	scale := [3]float64{pix[0], pix[1], qfac(p0) * pix[2]}
	var a [4][4]float64
	for r := range 3 {
		for col := range 3 {
			a[r][col] = R[r][col] * scale[col]
		}
	}
	a[0][3], a[1][3], a[2][3] = qx, qy, qz
	a[3][3] = 1
	return a
}

// quaternFromAffine finds qform parameters reproducing the affine's 3x3
// part: voxel sizes (column norms), qfac (sign of the determinant) and the
// quaternion (b, c, d) of the remaining rotation, with a >= 0. ok is false
// when a column is zero or the columns are not orthogonal (a sheared
// affine has no qform).
func quaternFromAffine(A [4][4]float64) (b, c, d, qf float64, pix [3]float64, ok bool) {
	var R [3][3]float64
	for col := range 3 {
		n := math.Sqrt(A[0][col]*A[0][col] + A[1][col]*A[1][col] + A[2][col]*A[2][col])
		if n == 0 || math.IsNaN(n) || math.IsInf(n, 0) {
			return 0, 0, 0, 0, pix, false
		}
		pix[col] = n
		for r := range 3 {
			R[r][col] = A[r][col] / n
		}
	}
	for i := range 3 {
		for j := i + 1; j < 3; j++ {
			if math.Abs(R[0][i]*R[0][j]+R[1][i]*R[1][j]+R[2][i]*R[2][j]) > 1e-4 {
				return 0, 0, 0, 0, pix, false
			}
		}
	}
	det := R[0][0]*(R[1][1]*R[2][2]-R[1][2]*R[2][1]) -
		R[0][1]*(R[1][0]*R[2][2]-R[1][2]*R[2][0]) +
		R[0][2]*(R[1][0]*R[2][1]-R[1][1]*R[2][0])
	qf = 1
	if det < 0 {
		qf = -1
		for r := range 3 {
			R[r][2] = -R[r][2]
		}
	}
	// Rotation matrix to quaternion, branching on the largest diagonal term
	// for accuracy (common practice; checked by the round trip in tests).
	var a float64
	switch tr := R[0][0] + R[1][1] + R[2][2]; {
	case tr > 0:
		s := 2 * math.Sqrt(tr+1)
		a, b, c, d = s/4, (R[2][1]-R[1][2])/s, (R[0][2]-R[2][0])/s, (R[1][0]-R[0][1])/s
	case R[0][0] > R[1][1] && R[0][0] > R[2][2]:
		s := 2 * math.Sqrt(1+R[0][0]-R[1][1]-R[2][2])
		a, b, c, d = (R[2][1]-R[1][2])/s, s/4, (R[0][1]+R[1][0])/s, (R[0][2]+R[2][0])/s
	case R[1][1] > R[2][2]:
		s := 2 * math.Sqrt(1+R[1][1]-R[0][0]-R[2][2])
		a, b, c, d = (R[0][2]-R[2][0])/s, (R[0][1]+R[1][0])/s, s/4, (R[1][2]+R[2][1])/s
	default:
		s := 2 * math.Sqrt(1+R[2][2]-R[0][0]-R[1][1])
		a, b, c, d = (R[1][0]-R[0][1])/s, (R[0][2]+R[2][0])/s, (R[1][2]+R[2][1])/s, s/4
	}
	if a < 0 {
		a, b, c, d = -a, -b, -c, -d
	}
	// Near 180 degrees a reader recomputes a = sqrt(1 - b² - c² - d²) from
	// float32 values, where rounding makes a spurious a of order 1e-4. Scale
	// (b, c, d) up by 2^-20 so that the stored sum is at least 1: a reader
	// then takes a = 0 and renormalises (methods notes m.4).
	if a < 1e-4 {
		f := 1 + 1.0/(1<<20)
		b, c, d = b*f, c*f, d*f
	}
	return b, c, d, qf, pix, true
}
