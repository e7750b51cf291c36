package motion

import (
	"math"
	"testing"
)

// rodrigues returns the rotation by angle (radians) about the unit axis k:
// R = I + sin θ K + (1 − cos θ) K², K the cross-product matrix of k
// (Rodrigues' rotation formula).
func rodrigues(k [3]float64, theta float64) [3][3]float64 {
	K := [3][3]float64{{0, -k[2], k[1]}, {k[2], 0, -k[0]}, {-k[1], k[0], 0}}
	var K2 [3][3]float64
	for i := 0; i < 3; i++ {
		for j := 0; j < 3; j++ {
			for m := 0; m < 3; m++ {
				K2[i][j] += K[i][m] * K[m][j]
			}
		}
	}
	var r [3][3]float64
	s, c := math.Sin(theta), math.Cos(theta)
	for i := 0; i < 3; i++ {
		r[i][i] = 1
		for j := 0; j < 3; j++ {
			r[i][j] += s*K[i][j] + (1-c)*K2[i][j]
		}
	}
	return r
}

func mul3(a, b [3][3]float64) [3][3]float64 {
	var c [3][3]float64
	for i := 0; i < 3; i++ {
		for j := 0; j < 3; j++ {
			for m := 0; m < 3; m++ {
				c[i][j] += a[i][m] * b[m][j]
			}
		}
	}
	return c
}

// independentRotation composes Rx·Ry·Rz from Rodrigues' formula per axis by
// explicit 3×3 multiplication (angles in degrees).
func independentRotation(rx, ry, rz float64) [3][3]float64 {
	d := math.Pi / 180
	return mul3(rodrigues([3]float64{1, 0, 0}, rx*d), mul3(rodrigues([3]float64{0, 1, 0}, ry*d), rodrigues([3]float64{0, 0, 1}, rz*d)))
}

func TestRotationWorkedCases(t *testing.T) {
	// Worked by hand: a right-handed quarter turn about x takes +y to +z;
	// Rx(90°)·Rz(90°) first takes +x to +y (Rz), then +y to +z (Rx).
	apply := func(r [3][3]float64, v [3]float64) [3]float64 {
		var o [3]float64
		for i := 0; i < 3; i++ {
			o[i] = r[i][0]*v[0] + r[i][1]*v[1] + r[i][2]*v[2]
		}
		return o
	}
	cases := []struct {
		rx, ry, rz float64
		in, want   [3]float64
	}{
		{90, 0, 0, [3]float64{0, 1, 0}, [3]float64{0, 0, 1}},
		{0, 90, 0, [3]float64{0, 0, 1}, [3]float64{1, 0, 0}}, // about y: z to x
		{0, 0, 90, [3]float64{1, 0, 0}, [3]float64{0, 1, 0}}, // about z: x to y
		{90, 0, 90, [3]float64{1, 0, 0}, [3]float64{0, 0, 1}},
		{90, 90, 0, [3]float64{0, 0, 1}, [3]float64{1, 0, 0}}, // Ry: z to x, then Rx leaves x fixed
		{90, 90, 0, [3]float64{0, 1, 0}, [3]float64{0, 0, 1}}, // Ry leaves y fixed, then Rx: y to z
	}
	for _, c := range cases {
		got := apply(Rotation(c.rx, c.ry, c.rz), c.in)
		for i := 0; i < 3; i++ {
			if math.Abs(got[i]-c.want[i]) > 1e-12 {
				t.Errorf("Rotation(%g,%g,%g)·%v = %v, want %v", c.rx, c.ry, c.rz, c.in, got, c.want)
				break
			}
		}
	}
}

func TestRotationMatchesRodrigues(t *testing.T) {
	// Independent composition: Rodrigues' formula per axis, explicit products.
	for _, a := range [][3]float64{{1, 2, 3}, {-3, 0.5, 2.5}, {30, -45, 60}, {0.01, -0.02, 0.03}, {170, 80, -120}} {
		got := Rotation(a[0], a[1], a[2])
		want := independentRotation(a[0], a[1], a[2])
		for i := 0; i < 3; i++ {
			for j := 0; j < 3; j++ {
				if math.Abs(got[i][j]-want[i][j]) > 1e-13 {
					t.Fatalf("Rotation%v[%d][%d] = %v, Rodrigues composition %v", a, i, j, got[i][j], want[i][j])
				}
			}
		}
		rx, ry, rz := Angles(got)
		if math.Abs(rx-a[0]) > 1e-9 || math.Abs(ry-a[1]) > 1e-9 || math.Abs(rz-a[2]) > 1e-9 {
			t.Errorf("Angles(Rotation%v) = %v %v %v", a, rx, ry, rz)
		}
	}
}

func TestMatrixRoundTrip(t *testing.T) {
	// x' = R(x − c) + c + t checked on a point by direct evaluation, and
	// FromMatrix inverts Matrix.
	p := Params{1.5, -2, 0.25, 2, -1, 3}
	c := [3]float64{10, -20, 5}
	m := p.Matrix(c)
	x := [3]float64{30, 7, -12}
	r := independentRotation(p[3], p[4], p[5])
	for i := 0; i < 3; i++ {
		want := c[i] + p[i]
		for j := 0; j < 3; j++ {
			want += r[i][j] * (x[j] - c[j])
		}
		got := m[i][0]*x[0] + m[i][1]*x[1] + m[i][2]*x[2] + m[i][3]
		if math.Abs(got-want) > 1e-12 {
			t.Errorf("row %d: %v, want %v", i, got, want)
		}
	}
	q := FromMatrix(m, c)
	for i := range p {
		if math.Abs(q[i]-p[i]) > 1e-12 {
			t.Fatalf("FromMatrix(Matrix(p)) = %v, want %v", q, p)
		}
	}
	id := mul4(m, invRigid(m))
	for i := 0; i < 4; i++ {
		for j := 0; j < 4; j++ {
			want := 0.0
			if i == j {
				want = 1
			}
			if math.Abs(id[i][j]-want) > 1e-12 {
				t.Fatalf("m·m⁻¹ = %v", id)
			}
		}
	}
}
