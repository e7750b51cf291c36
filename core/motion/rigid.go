package motion

import "math"

// Params are one volume's rigid-body parameters, in the order of the
// motion.tsv columns: translations tx, ty, tz in mm, then rotations rx, ry, rz
// in degrees about the world x, y and z axes (see the package documentation
// for the map they define).
type Params [6]float64

// Names are the motion.tsv column names of the six parameters.
var Names = [6]string{"trans_x", "trans_y", "trans_z", "rot_x", "rot_y", "rot_z"}

const deg = math.Pi / 180

// Rotation returns R = Rx(rx) · Ry(ry) · Rz(rz) for angles in degrees, each a
// right-handed rotation about a world axis.
func Rotation(rx, ry, rz float64) [3][3]float64 {
	sa, ca := math.Sincos(rx * deg)
	sb, cb := math.Sincos(ry * deg)
	sc, cc := math.Sincos(rz * deg)
	return [3][3]float64{
		{cb * cc, -cb * sc, sb},
		{ca*sc + sa*sb*cc, ca*cc - sa*sb*sc, -sa * cb},
		{sa*sc - ca*sb*cc, sa*cc + ca*sb*sc, ca * cb},
	}
}

// Angles inverts Rotation: the angles (degrees) with Rotation(rx, ry, rz) = r,
// ry in [−90°, 90°]. r must be a rotation matrix.
func Angles(r [3][3]float64) (rx, ry, rz float64) {
	s := math.Max(-1, math.Min(1, r[0][2]))
	ry = math.Asin(s)
	rx = math.Atan2(-r[1][2], r[2][2])
	rz = math.Atan2(-r[0][1], r[0][0])
	return rx / deg, ry / deg, rz / deg
}

// Matrix returns the 4×4 world-to-world map of p about the centre c (mm):
// x' = R (x − c) + c + t.
func (p Params) Matrix(c [3]float64) [4][4]float64 {
	r := Rotation(p[3], p[4], p[5])
	var m [4][4]float64
	for i := 0; i < 3; i++ {
		off := c[i] + p[i]
		for j := 0; j < 3; j++ {
			m[i][j] = r[i][j]
			off -= r[i][j] * c[j]
		}
		m[i][3] = off
	}
	m[3][3] = 1
	return m
}

// FromMatrix reads the parameters back from a rigid world-to-world map m about
// the centre c (the inverse of Params.Matrix).
func FromMatrix(m [4][4]float64, c [3]float64) Params {
	var r [3][3]float64
	for i := 0; i < 3; i++ {
		for j := 0; j < 3; j++ {
			r[i][j] = m[i][j]
		}
	}
	var p Params
	p[3], p[4], p[5] = Angles(r)
	// m·x = R x + d with d = c − R c + t, so t = d − c + R c.
	for i := 0; i < 3; i++ {
		t := m[i][3] - c[i]
		for j := 0; j < 3; j++ {
			t += r[i][j] * c[j]
		}
		p[i] = t
	}
	return p
}

func mul4(a, b [4][4]float64) [4][4]float64 {
	var c [4][4]float64
	for i := 0; i < 4; i++ {
		for j := 0; j < 4; j++ {
			var s float64
			for k := 0; k < 4; k++ {
				s += a[i][k] * b[k][j]
			}
			c[i][j] = s
		}
	}
	return c
}

// invRigid inverts a rigid map: [R d]⁻¹ = [Rᵀ −Rᵀd].
func invRigid(m [4][4]float64) [4][4]float64 {
	var o [4][4]float64
	for i := 0; i < 3; i++ {
		for j := 0; j < 3; j++ {
			o[i][j] = m[j][i]
		}
	}
	for i := 0; i < 3; i++ {
		o[i][3] = -(o[i][0]*m[0][3] + o[i][1]*m[1][3] + o[i][2]*m[2][3])
	}
	o[3][3] = 1
	return o
}
