package phantom

import (
	"math"
	"math/rand/v2"
)

// Fixed design of the "lantern" scenario. The README (Scenario.ReadmeTXT)
// states every one of these numbers.
const (
	nx, ny, nz = 64, 64, 36
	voxX, voxY = 3.0, 3.0
	voxZ       = 3.5
	// World origin (0, 0, 0) sits at voxel (32, 32, 18).
	originI, originJ, originK = 32, 32, 18

	numVolumes     = 160
	trSec          = 2.0
	sampleFraction = 0.5 // scan k is sampled at (k + 0.5)·TR (methods §a.5)

	blockSec      = 18.0 // task block length
	firstOnsetSec = 8.0  // rest before the first block
	blocksPerCond = 5

	noiseFrac    = 0.012 // noise SD as a fraction of the local baseline
	noiseRho     = 0.35  // AR(1) coefficient
	noiseFWHMVox = 2.0   // spatial smoothness of the noise, voxels
	noiseRadius  = 3     // kernel half-width, voxels (3.5 σ)
	pvSigmaVox   = 0.55  // partial-volume blur of the anatomy, voxels
	pvRadius     = 3
	bgSigma      = 7.0 // Rician background: per-channel SD, units

	motionEffect = 0.004 // intensity change at the head's top/bottom per 0.3 mm of trans_z
	motionRef    = 0.3   // mm
)

// Tissue labels of the phantom.
const (
	labBackground uint8 = iota
	labScalp
	labSkull
	labCSF
	labGM
	labWM
	labDeepGM
)

// Baseline intensity per label, units of the int16 export.
var tissueIntensity = [...]float64{
	labBackground: 0,
	labScalp:      380,
	labSkull:      70,
	labCSF:        430,
	labGM:         1060,
	labWM:         770,
	labDeepGM:     930,
}

// Head geometry, world mm.
var (
	headCentre = [3]float64{0, -4, -6}
	headSemi   = [3]float64{70, 88, 62}
)

const (
	eggFactor   = 0.06 // the head widens by 6 % of its half-width towards the back
	skullInset  = 5.0  // scalp thickness, mm
	csfInset    = 10.0 // scalp + skull, mm
	brainInset  = 12.0 // scalp + skull + outer CSF, mm
	fissureHalf = 1.5  // half-width of the midline fissure, mm
)

// Blob is one planted region: a sphere of activation (restricted to grey
// and white matter) with a flat percent signal change per condition.
type Blob struct {
	Name     string
	IJK      [3]int     // centre voxel, 0-based
	MM       [3]float64 // centre in world mm (Affine applied to IJK)
	RadiusMM float64
	Percent  []float64 // percent signal change of the local baseline, per Scenario.Conditions
	InTruth  bool      // part of the count > watch truth map
	Voxels   int       // planted voxels (sphere ∩ grey/white matter)

	idx []int32 // planted voxels, ascending
}

// The planted regions: three answer count − watch, two (the visual pair)
// respond equally to both conditions.
var blobSpecs = []struct {
	name    string
	ijk     [3]int
	radius  float64
	count   float64
	watch   float64
	inTruth bool
}{
	{"left lateral frontal", [3]int{18, 39, 23}, 9, 2.0, 0, true},
	{"left medial frontal", [3]int{29, 35, 29}, 7.5, 1.5, 0, true},
	{"right parietal", [3]int{42, 19, 24}, 9, 2.5, 0, true},
	{"left occipital (shared)", [3]int{27, 8, 16}, 10.5, 2.0, 2.0, false},
	{"right occipital (shared)", [3]int{37, 8, 16}, 10.5, 2.0, 2.0, false},
}

// Scenario is the whole demo run: grid, timing, tables, the planted truth
// and the precomputed maps the volume stream draws on.
type Scenario struct {
	Name    string // "lantern"
	Seed    uint64
	Dims    [3]int
	VoxelMM [3]float64
	Affine  [4][4]float64 // 0-based voxel (i, j, k, 1) to world mm, RAS
	// NIfTI transform codes for the writer: 1 (scanner-based anatomical
	// coordinates) for both; the qform is the same pure scaling and shift.
	QformCode, SformCode int
	Volumes              int
	TR                   float64 // seconds

	Conditions   []string // "count", "watch"
	EventsTSV    []byte   // BIDS: onset, duration, trial_type
	ConfoundsTSV []byte   // trans_x, trans_y, trans_z (mm), rot_x, rot_y, rot_z (degrees)
	ReadmeTXT    []byte

	Truth    []float32 // 1 inside the planted count > watch activation, 0 elsewhere
	Brain    []bool    // inside the brain surface (grey, white, deep grey matter, CSF)
	Blobs    []Blob
	Contrast string // "count-watch=count - watch"

	label      []uint8
	base       []float32 // noiseless baseline image
	noiseScale []float32 // SD of the smooth noise per voxel (0 outside the head)
	driftMap   []float32 // drift amplitude per unit of drift[t]
	motionMap  []float32 // intensity change per unit of motion[t]
	background []int32   // voxels outside the head (Rician noise)
	normal     *normalTable

	onsets    map[string][]float64
	durations map[string][]float64
	reg       map[string][]float64 // per condition, normalised HRF regressor, one per volume
	drift     []float64            // fraction of baseline per volume (before driftMap's spatial factor)
	motion    []float64            // trans_z / 0.3 mm per volume
	confounds [6][]float64
	driftInfo struct{ lin, amp, period, phase float64 }
}

// New builds the scenario for a seed. The anatomy's shape and the planted
// regions are fixed; the seed sets the block order, the rest jitter, the
// texture, the drift, the motion traces and (through Stream) the noise.
func New(seed uint64) *Scenario {
	s := &Scenario{
		Name:      "lantern",
		Seed:      seed,
		Dims:      [3]int{nx, ny, nz},
		VoxelMM:   [3]float64{voxX, voxY, voxZ},
		QformCode: 1,
		SformCode: 1,
		Volumes:   numVolumes,
		TR:        trSec,
		Conditions: []string{
			"count", "watch",
		},
		Contrast: "count-watch=count - watch",
	}
	s.Affine = [4][4]float64{
		{voxX, 0, 0, -voxX * originI},
		{0, voxY, 0, -voxY * originJ},
		{0, 0, voxZ, -voxZ * originK},
		{0, 0, 0, 1},
	}
	rng := rand.New(rand.NewPCG(seed, 0x6c616e7465726e)) // stream "lantern"
	s.normal = newNormalTable()
	s.buildAnatomy(rng)
	s.buildBlobs()
	s.buildDesign(rng)
	s.buildNuisance(rng)
	s.EventsTSV = s.eventsTSV()
	s.ConfoundsTSV = s.confoundsTSV()
	s.ReadmeTXT = s.readme()
	return s
}

// world maps a voxel to world mm through the scenario's affine.
func (s *Scenario) world(i, j, k float64) [3]float64 {
	a := &s.Affine
	return [3]float64{
		a[0][0]*i + a[0][1]*j + a[0][2]*k + a[0][3],
		a[1][0]*i + a[1][1]*j + a[1][2]*k + a[1][3],
		a[2][0]*i + a[2][1]*j + a[2][2]*k + a[2][3],
	}
}

// wave is one plane cosine of a smooth random field.
type wave struct{ kx, ky, kz, phase, amp float64 }

// randomWaves draws n plane waves with wavelengths in [minL, maxL] mm whose
// amplitudes make the field's standard deviation about sd.
func randomWaves(rng *rand.Rand, n int, minL, maxL, sd float64) []wave {
	w := make([]wave, n)
	amp := sd * math.Sqrt(2/float64(n)) // each cosine has variance amp²/2
	for i := range w {
		// Uniform direction on the sphere.
		z := 2*rng.Float64() - 1
		phi := 2 * math.Pi * rng.Float64()
		r := math.Sqrt(1 - z*z)
		k := 2 * math.Pi / (minL + (maxL-minL)*rng.Float64())
		w[i] = wave{k * r * math.Cos(phi), k * r * math.Sin(phi), k * z, 2 * math.Pi * rng.Float64(), amp}
	}
	return w
}

func evalWaves(w []wave, p [3]float64) float64 {
	v := 0.0
	for _, c := range w {
		v += c.amp * math.Cos(c.kx*p[0]+c.ky*p[1]+c.kz*p[2]+c.phase)
	}
	return v
}

// ellipsoidRadius is the normalised radius of p relative to the head
// centre for the egg-shaped ellipsoid with the head's semi-axes shrunk by
// inset mm (1 on the surface), and the length of p − centre.
func ellipsoidRadius(p [3]float64, inset float64) (r, length float64) {
	q := [3]float64{p[0] - headCentre[0], p[1] - headCentre[1], p[2] - headCentre[2]}
	b := headSemi[1] - inset
	a := (headSemi[0] - inset) * (1 - eggFactor*q[1]/headSemi[1])
	c := headSemi[2] - inset
	r = math.Sqrt(q[0]*q[0]/(a*a) + q[1]*q[1]/(b*b) + q[2]*q[2]/(c*c))
	return r, math.Sqrt(q[0]*q[0] + q[1]*q[1] + q[2]*q[2])
}

// inEllipsoid reports whether p lies in the axis-aligned ellipsoid.
func inEllipsoid(p, c, semi [3]float64) bool {
	dx, dy, dz := (p[0]-c[0])/semi[0], (p[1]-c[1])/semi[1], (p[2]-c[2])/semi[2]
	return dx*dx+dy*dy+dz*dz <= 1
}

func (s *Scenario) buildAnatomy(rng *rand.Rand) {
	n := nx * ny * nz
	s.label = make([]uint8, n)
	s.Brain = make([]bool, n)
	raw := make([]float32, n)
	texture := randomWaves(rng, 12, 16, 60, 0.035)
	fold := randomWaves(rng, 10, 14, 26, 0.6)
	ventricles := [][2][3]float64{
		{{-11, -2, 6}, {5, 18, 7}},
		{{11, -2, 6}, {5, 18, 7}},
	}
	deepGM := [][2][3]float64{
		{{-11, -16, -2}, {7, 9, 6}},
		{{11, -16, -2}, {7, 9, 6}},
	}
	dropout := [3]float64{0, 44, -42}
	for k := 0; k < nz; k++ {
		for j := 0; j < ny; j++ {
			for i := 0; i < nx; i++ {
				v := i + nx*(j+ny*k)
				p := s.world(float64(i), float64(j), float64(k))
				rOut, _ := ellipsoidRadius(p, 0)
				if rOut > 1 {
					continue
				}
				lab := labScalp
				if r, _ := ellipsoidRadius(p, skullInset); r <= 1 {
					lab = labSkull
					if r, _ := ellipsoidRadius(p, csfInset); r <= 1 {
						lab = labCSF
						if rb, length := ellipsoidRadius(p, brainInset); rb <= 1 {
							s.Brain[v] = true
							lab = brainLabel(p, rb, length, fold, ventricles, deepGM)
						}
					}
				}
				s.label[v] = lab
				val := tissueIntensity[lab] * (1 + evalWaves(texture, p))
				val *= 1 + 0.08*rOut*rOut // receive coil: brighter towards the surface
				d2 := sq(p[0]-dropout[0]) + sq(p[1]-dropout[1]) + sq(p[2]-dropout[2])
				val *= 1 - 0.45*math.Exp(-d2/(2*12*12)) // susceptibility dropout
				raw[v] = float32(val)
			}
		}
	}
	// Partial volume: a slight blur, renormalised at the z edges where the
	// head is cut by the field of view.
	s.base = make([]float32, n)
	k := gaussKernel(pvSigmaVox, pvRadius)
	tmp := make([]float32, n)
	smooth3(s.base, raw, tmp, k)
	zc := zEdgeSums(k, false)
	for kk := 0; kk < nz; kk++ {
		f := float32(1 / zc[kk])
		sl := s.base[kk*nx*ny : (kk+1)*nx*ny]
		for v := range sl {
			sl[v] *= f
		}
	}
	// Noise SD per voxel, with the variance of the smoothed noise restored
	// to 1 in the z-edge slices where the kernel is truncated.
	kn := gaussKernel(noiseFWHMVox/(2*math.Sqrt(2*math.Ln2)), noiseRadius)
	sx := 0.0
	for _, w := range kn {
		sx += float64(w) * float64(w)
	}
	zs := zEdgeSums(kn, true)
	s.noiseScale = make([]float32, n)
	s.driftMap = make([]float32, n)
	s.motionMap = make([]float32, n)
	driftField := randomWaves(rng, 6, 60, 200, 0.25)
	for kk := 0; kk < nz; kk++ {
		scale := noiseFrac / math.Sqrt(sx*sx*zs[kk])
		for j := 0; j < ny; j++ {
			for i := 0; i < nx; i++ {
				v := i + nx*(j+ny*kk)
				if s.label[v] == labBackground {
					s.background = append(s.background, int32(v))
					continue
				}
				b := float64(s.base[v])
				p := s.world(float64(i), float64(j), float64(kk))
				s.noiseScale[v] = float32(b * scale)
				s.driftMap[v] = float32(b * (1 + evalWaves(driftField, p)))
				s.motionMap[v] = float32(b * motionEffect * (p[2] - headCentre[2]) / headSemi[2])
			}
		}
	}
}

func sq(x float64) float64 { return x * x }

// brainLabel classifies a point inside the brain surface (normalised
// radius rb, distance length from the head centre).
func brainLabel(p [3]float64, rb, length float64, fold []wave, ventricles, deepGM [][2][3]float64) uint8 {
	for _, e := range ventricles {
		if inEllipsoid(p, e[0], e[1]) {
			return labCSF
		}
	}
	for _, e := range deepGM {
		if inEllipsoid(p, e[0], e[1]) {
			return labDeepGM
		}
	}
	// The fissure reaches down to an arched floor (lowest at the front and back).
	upper := p[2] > headCentre[2]+14-0.004*sq(p[1]-headCentre[1])
	ax := math.Abs(p[0])
	if upper && ax < fissureHalf {
		return labCSF
	}
	// Depth below the surface along the ray from the centre; the cortex
	// thickness varies between about 3 and 9 mm with a smooth folding field.
	depth := math.Inf(1)
	if rb > 0 {
		depth = length * (1/rb - 1)
	}
	thick := 6 + 3*math.Tanh(evalWaves(fold, p))
	if depth < thick || (upper && ax-fissureHalf < thick) {
		return labGM
	}
	return labWM
}

func (s *Scenario) buildBlobs() {
	n := nx * ny * nz
	s.Truth = make([]float32, n)
	for _, b := range blobSpecs {
		bl := Blob{
			Name:     b.name,
			IJK:      b.ijk,
			MM:       s.world(float64(b.ijk[0]), float64(b.ijk[1]), float64(b.ijk[2])),
			RadiusMM: b.radius,
			Percent:  []float64{b.count, b.watch},
			InTruth:  b.inTruth,
		}
		ri := int(b.radius/voxX) + 1
		rk := int(b.radius/voxZ) + 1
		for k := max(0, b.ijk[2]-rk); k <= min(nz-1, b.ijk[2]+rk); k++ {
			for j := max(0, b.ijk[1]-ri); j <= min(ny-1, b.ijk[1]+ri); j++ {
				for i := max(0, b.ijk[0]-ri); i <= min(nx-1, b.ijk[0]+ri); i++ {
					d2 := sq(float64(i-b.ijk[0])*voxX) + sq(float64(j-b.ijk[1])*voxY) + sq(float64(k-b.ijk[2])*voxZ)
					v := i + nx*(j+ny*k)
					lab := s.label[v]
					if d2 > b.radius*b.radius || (lab != labGM && lab != labWM && lab != labDeepGM) {
						continue
					}
					bl.idx = append(bl.idx, int32(v)) // ascending: k, j, i loops
				}
			}
		}
		bl.Voxels = len(bl.idx)
		if b.inTruth {
			for _, v := range bl.idx {
				s.Truth[v] = 1
			}
		}
		s.Blobs = append(s.Blobs, bl)
	}
}

// buildDesign draws the block order (five blocks of each condition, never
// three of one in a row) and the rest gaps (three each of 10, 12 and 14 s,
// shuffled), then the condition regressors.
func (s *Scenario) buildDesign(rng *rand.Rand) {
	order := make([]int, 2*blocksPerCond)
	for i := range order {
		order[i] = i % 2
	}
	for {
		rng.Shuffle(len(order), func(a, b int) { order[a], order[b] = order[b], order[a] })
		ok := true
		for i := 2; i < len(order); i++ {
			if order[i] == order[i-1] && order[i] == order[i-2] {
				ok = false
			}
		}
		if ok {
			break
		}
	}
	gaps := []float64{10, 10, 10, 12, 12, 12, 14, 14, 14}
	rng.Shuffle(len(gaps), func(a, b int) { gaps[a], gaps[b] = gaps[b], gaps[a] })
	s.onsets = map[string][]float64{}
	s.durations = map[string][]float64{}
	t := firstOnsetSec
	for b, c := range order {
		name := s.Conditions[c]
		s.onsets[name] = append(s.onsets[name], t)
		s.durations[name] = append(s.durations[name], blockSec)
		t += blockSec
		if b < len(gaps) {
			t += gaps[b]
		}
	}
	s.reg = map[string][]float64{}
	for _, c := range s.Conditions {
		s.reg[c] = blockRegressor(s.onsets[c], s.durations[c], numVolumes, trSec)
	}
}

// buildNuisance draws the drift and the motion-like traces.
func (s *Scenario) buildNuisance(rng *rand.Rand) {
	n := numVolumes
	runSec := float64(n) * trSec
	d := &s.driftInfo
	d.lin = (0.004 + 0.004*rng.Float64()) * float64(1-2*int(rng.IntN(2)))
	d.amp = 0.003 + 0.003*rng.Float64()
	d.period = 160 + 140*rng.Float64()
	d.phase = 2 * math.Pi * rng.Float64()
	s.drift = make([]float64, n)
	for k := range s.drift {
		t := (float64(k) + sampleFraction) * trSec
		s.drift[k] = d.lin*(2*t/runSec-1) + d.amp*math.Cos(2*math.Pi*t/d.period+d.phase)
	}
	// Six smooth random walks, starting at 0 (aligned to the first volume).
	peaks := [6]float64{}
	for c := 0; c < 6; c++ {
		if c < 3 {
			peaks[c] = 0.06 + 0.19*rng.Float64() // mm
		} else {
			peaks[c] = 0.02 + 0.10*rng.Float64() // degrees
		}
		walk := make([]float64, n)
		for k := 1; k < n; k++ {
			walk[k] = walk[k-1] + rng.NormFloat64()
		}
		sm := make([]float64, n)
		for k := range sm {
			sum, cnt := 0.0, 0
			for q := max(0, k-3); q <= min(n-1, k+3); q++ {
				sum += walk[q]
				cnt++
			}
			sm[k] = sum / float64(cnt)
		}
		s0 := sm[0]
		for k := range sm {
			sm[k] -= s0
		}
		peak := 0.0
		for _, x := range sm {
			peak = max(peak, math.Abs(x))
		}
		if peak > 0 {
			for k := range sm {
				sm[k] *= peaks[c] / peak
			}
		}
		s.confounds[c] = sm
	}
	s.motion = make([]float64, n)
	for k := range s.motion {
		s.motion[k] = s.confounds[2][k] / motionRef
	}
}
