package motion

import (
	"errors"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"winnow/core/nifti"
)

// The test phantom is an analytic function of world position, so moved
// volumes are made by evaluating it at exactly transformed positions: no
// resampler of this package is involved in making the data.

type blob struct {
	c     [3]float64
	sigma float64
	amp   float64
}

var blobs = []blob{
	{[3]float64{-25, 20, 10}, 8, 350},
	{[3]float64{20, 30, -8}, 6, -250},
	{[3]float64{5, -35, 15}, 10, 300},
	{[3]float64{-10, -5, -20}, 7, 400},
	{[3]float64{30, -15, 5}, 5, 250},
	{[3]float64{-5, 10, 25}, 6, -300},
	{[3]float64{0, 0, 0}, 12, -200},
}

// headAt is a smooth ellipsoidal head (semi-axes 58, 66, 40 mm about
// (2, −3, 4) mm, soft edge of about 3 mm) with asymmetric internal blobs.
func headAt(x [3]float64) float64 {
	d := [3]float64{(x[0] - 2) / 58, (x[1] + 3) / 66, (x[2] - 4) / 40}
	rho := math.Sqrt(d[0]*d[0] + d[1]*d[1] + d[2]*d[2])
	v := 800 / (1 + math.Exp((rho-1)/0.05))
	for _, b := range blobs {
		dx, dy, dz := x[0]-b.c[0], x[1]-b.c[1], x[2]-b.c[2]
		v += b.amp * math.Exp(-(dx*dx+dy*dy+dz*dz)/(2*b.sigma*b.sigma)) / (1 + math.Exp((rho-1)/0.05))
	}
	return v + 20
}

// testGrid is a 48×48×30 grid with 3 × 3 × 3.5 mm voxels, tilted 10° about x
// and shifted, so that world and voxel axes differ.
func testGrid(dims [3]int) nifti.Grid {
	vox := [3]float64{3, 3, 3.5}
	c, s := math.Cos(10*math.Pi/180), math.Sin(10*math.Pi/180)
	rot := [3][3]float64{{1, 0, 0}, {0, c, -s}, {0, s, c}}
	var a [4][4]float64
	for i := 0; i < 3; i++ {
		for j := 0; j < 3; j++ {
			a[i][j] = rot[i][j] * vox[j]
		}
	}
	// Put the grid centre near world (1, −2, 3) mm.
	ctr := [3]float64{float64(dims[0]-1) / 2, float64(dims[1]-1) / 2, float64(dims[2]-1) / 2}
	want := [3]float64{1, -2, 3}
	for i := 0; i < 3; i++ {
		a[i][3] = want[i] - (a[i][0]*ctr[0] + a[i][1]*ctr[1] + a[i][2]*ctr[2])
	}
	a[3][3] = 1
	return nifti.Grid{Dims: dims, VoxelMM: vox, Affine: a, SformCode: 1}
}

// movedVolume samples the head moved by p: the moving volume at world y holds
// the head at W⁻¹(y) = Rᵀ(y − c − t) + c, with R composed by Rodrigues'
// formula (independent of the package's Rotation). noise is the standard
// deviation of added Gaussian noise.
func movedVolume(g nifti.Grid, p Params, noise float64, rng *rand.Rand) []float32 {
	r := independentRotation(p[3], p[4], p[5])
	a := g.Affine
	c := [3]float64{}
	for i := 0; i < 3; i++ {
		c[i] = a[i][0]*float64(g.Dims[0]-1)/2 + a[i][1]*float64(g.Dims[1]-1)/2 + a[i][2]*float64(g.Dims[2]-1)/2 + a[i][3]
	}
	out := make([]float32, g.Voxels())
	n := 0
	for k := 0; k < g.Dims[2]; k++ {
		for j := 0; j < g.Dims[1]; j++ {
			for i := 0; i < g.Dims[0]; i++ {
				var y, d, x [3]float64
				for m := 0; m < 3; m++ {
					y[m] = a[m][0]*float64(i) + a[m][1]*float64(j) + a[m][2]*float64(k) + a[m][3]
					d[m] = y[m] - c[m] - p[m]
				}
				for m := 0; m < 3; m++ {
					x[m] = r[0][m]*d[0] + r[1][m]*d[1] + r[2][m]*d[2] + c[m]
				}
				v := headAt(x)
				if noise > 0 {
					v += noise * rng.NormFloat64()
				}
				out[n] = float32(v)
				n++
			}
		}
	}
	return out
}

// trajectory draws volumes' parameters: translations uniform in ±3 mm,
// rotations uniform in ±3°, independent per volume (so consecutive volumes
// can differ by up to 6 mm and 6°); volume 0 is the reference position.
func trajectory(n int, rng *rand.Rand) []Params {
	ps := make([]Params, n)
	for t := 1; t < n; t++ {
		for a := 0; a < 6; a++ {
			ps[t][a] = 3 * (2*rng.Float64() - 1)
		}
	}
	return ps
}

func TestRecoversKnownMotion(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 11))
	g := testGrid([3]int{48, 48, 30})
	truth := trajectory(13, rng)
	const noise = 4.0 // about 0.5 % of the head intensity
	ref := movedVolume(g, truth[0], noise, rng)
	rl, err := NewRealigner(g, ref, Options{})
	if err != nil {
		t.Fatal(err)
	}
	var sq [6]float64
	est := make([]Params, len(truth))
	for v, p := range truth {
		vol := movedVolume(g, p, noise, rng)
		got, err := rl.Estimate(vol)
		if err != nil {
			t.Fatal(err)
		}
		est[v] = got
		for a := 0; a < 6; a++ {
			d := got[a] - p[a]
			sq[a] += d * d
		}
	}
	var rmsT, rmsR float64
	for a := 0; a < 3; a++ {
		rmsT += sq[a]
		rmsR += sq[a+3]
	}
	n := float64(len(truth))
	rmsT = math.Sqrt(rmsT / (3 * n))
	rmsR = math.Sqrt(rmsR / (3 * n))
	t.Logf("RMS error over %d volumes: translation %.4f mm, rotation %.4f deg", len(truth), rmsT, rmsR)
	// Target of the task: 0.1 mm and 0.1° RMS.
	if rmsT > 0.1 || rmsR > 0.1 {
		t.Errorf("RMS error %.4f mm, %.4f deg; want ≤ 0.1 mm and ≤ 0.1 deg", rmsT, rmsR)
	}
	// FD of the estimates against FD of the truth computed directly
	// (Power et al. 2012: Σ|Δt| + 50 mm Σ|Δθ| in radians).
	fdEst := FramewiseDisplacement(est)
	for v := 1; v < len(truth); v++ {
		var want float64
		for a := 0; a < 3; a++ {
			want += math.Abs(truth[v][a] - truth[v-1][a])
			want += 50 * math.Abs(truth[v][a+3]-truth[v-1][a+3]) * math.Pi / 180
		}
		if math.Abs(fdEst[v]-want) > 0.05*want+0.05 {
			t.Errorf("FD[%d] = %.4f from estimates, %.4f from truth", v, fdEst[v], want)
		}
	}
}

func TestResampleUndoesMotion(t *testing.T) {
	// Resampling a moved volume with the true parameters gives back the
	// head in the reference position (analytic values), inside the head.
	rng := rand.New(rand.NewPCG(3, 4))
	g := testGrid([3]int{48, 48, 30})
	ref := movedVolume(g, Params{}, 0, rng)
	p := Params{1.3, -2.2, 0.7, 2.5, -1.5, 2}
	vol := movedVolume(g, p, 0, rng)
	rl, err := NewRealigner(g, ref, Options{})
	if err != nil {
		t.Fatal(err)
	}
	out := make([]float32, len(vol))
	rl.Resample(out, vol, p)
	var sumSq, sumSqMoved float64
	n := 0
	nx, ny, nz := g.Dims[0], g.Dims[1], g.Dims[2]
	for k := 3; k < nz-3; k++ {
		for j := 3; j < ny-3; j++ {
			for i := 3; i < nx-3; i++ {
				idx := i + nx*(j+ny*k)
				if ref[idx] < 400 {
					continue
				}
				d := float64(out[idx] - ref[idx])
				sumSq += d * d
				dm := float64(vol[idx] - ref[idx])
				sumSqMoved += dm * dm
				n++
			}
		}
	}
	rms, rmsMoved := math.Sqrt(sumSq/float64(n)), math.Sqrt(sumSqMoved/float64(n))
	t.Logf("head voxels %d: RMS difference to the reference %.2f after resampling, %.2f before", n, rms, rmsMoved)
	// The phantom's intensity is about 800; the resampling error of a
	// smooth head must be a small fraction of the motion-induced difference.
	if rms > 0.1*rmsMoved || rms > 10 {
		t.Errorf("RMS after resampling %.2f (before %.2f); want under a tenth of it and under 10", rms, rmsMoved)
	}
}

func TestNonConvergenceNamesVolume(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 6))
	g := testGrid([3]int{32, 32, 20})
	ref := movedVolume(g, Params{}, 0, rng)
	rl, err := NewRealigner(g, ref, Options{MaxIter: 1, Levels: 1})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := rl.Estimate(ref); err != nil {
		// One iteration suffices for a volume identical to the reference.
		t.Fatalf("volume 0: %v", err)
	}
	_, err = rl.Estimate(movedVolume(g, Params{2, 1, 0, 2, 0, 1}, 0, rng))
	var ee *EstimateError
	if !errors.As(err, &ee) || ee.Volume != 1 || !strings.Contains(err.Error(), "volume 1") || !strings.Contains(err.Error(), "did not converge") {
		t.Fatalf("got %v; want a non-convergence error naming volume 1", err)
	}
}

func TestBadInput(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	g := testGrid([3]int{32, 32, 20})
	ref := movedVolume(g, Params{}, 0, rng)
	rl, err := NewRealigner(g, ref, Options{})
	if err != nil {
		t.Fatal(err)
	}
	vol := movedVolume(g, Params{}, 0, rng)
	vol[100] = float32(math.NaN())
	if _, err := rl.Estimate(vol); err == nil || !strings.Contains(err.Error(), "volume 0") || !strings.Contains(err.Error(), "finite") {
		t.Errorf("NaN volume: %v", err)
	}
	// A volume moved almost out of the field of view.
	if _, err := rl.Estimate(movedVolume(g, Params{80, 0, 0, 0, 0, 0}, 0, rng)); err == nil {
		t.Error("a head moved out of the field of view was accepted")
	}
	flat := make([]float32, g.Voxels())
	if _, err := NewRealigner(g, flat, Options{}); err == nil || !strings.Contains(err.Error(), "reference") {
		t.Errorf("flat reference: %v", err)
	}
	g2 := testGrid([3]int{32, 32, 2})
	if _, err := NewRealigner(g2, make([]float32, g2.Voxels()), Options{}); err == nil || !strings.Contains(err.Error(), "32x32x2") {
		t.Errorf("thin grid: %v", err)
	}
	if _, err := NewRealigner(g, ref, Options{Levels: 9}); err == nil {
		t.Error("9 levels accepted")
	}
	for _, c := range []struct{ idx, n int }{{0, 1}, {5, 5}, {-1, 10}} {
		if err := CheckReference(c.idx, c.n); err == nil {
			t.Errorf("CheckReference(%d, %d) accepted", c.idx, c.n)
		}
	}
	if err := CheckReference(4, 5); err != nil {
		t.Error(err)
	}
}
