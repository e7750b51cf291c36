//go:build !js && !wasip1

package main

import (
	"bufio"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"

	"winnow/core/design"
	"winnow/core/nifti"
	"winnow/core/smooth"
)

// runSpec describes the synthetic 4D run the fit figures use.
type runSpec struct {
	Dims    [3]int
	VoxelMM [3]float64
	Volumes int
	TR      float64
	Seed    uint64
}

// DataBytes is the decompressed size of the run's int16 image data.
func (s runSpec) DataBytes() int64 {
	return int64(s.Dims[0]) * int64(s.Dims[1]) * int64(s.Dims[2]) * int64(s.Volumes) * 2
}

func (s runSpec) voxels() int { return s.Dims[0] * s.Dims[1] * s.Dims[2] }

// synthRun is the set of files written for one runSpec.
type synthRun struct {
	Spec         runSpec
	Bold         string // .nii.gz path
	Events       string
	Confounds    string
	Contrast     string // the one t contrast SPEC
	CompressedB  int64
	HeadFraction float64 // share of the grid inside the bright ellipsoid
	ActiveVoxels int     // voxels carrying the planted effect
	GenerateSecs float64 // wall seconds spent generating and compressing
	Conditions   []string
	BlockSec     float64
}

// The two conditions of the block design and the contrast between them.
const (
	condA    = "pattern"
	condB    = "control"
	contrast = "pattern-control=pattern - control"
)

// gaussTable maps 16 random bits to a standard normal deviate through the
// inverse CDF at the bin centres, so that one 64-bit draw gives four
// deviates (truncated near ±4.4). Quality is ample for timing inputs.
var gaussTable = func() *[1 << 16]float32 {
	var t [1 << 16]float32
	for i := range t {
		p := (float64(i) + 0.5) / (1 << 16)
		t[i] = float32(math.Sqrt2 * math.Erfinv(2*p-1))
	}
	return &t
}()

// blocks returns the onsets of the block design: cycles of condA for
// block seconds, a gap, condB for block seconds, a gap, until the run ends.
func blocks(spec runSpec) (a, b []float64, block float64) {
	total := float64(spec.Volumes) * spec.TR
	block = 16.0
	gap := 8.0
	if total < 4*(2*block+2*gap) {
		block, gap = total/16, total/32
	}
	for t := 0.0; t+2*block+gap <= total; t += 2*block + 2*gap {
		a = append(a, t)
		b = append(b, t+block+gap)
	}
	return a, b, block
}

// generateRun writes bold.nii.gz, events.tsv and confounds.tsv into dir.
//
// The image is a bright ellipsoid ("head", about 40 % of the grid: semi-axes
// 0.45, 0.475 and 0.45 of the grid's extent, (π/6)·0.9·0.95·0.9 ≈ 0.40) with
// a smooth texture around 1000 on a dark background near 20, so that the
// automatic mask (30 % of the 98th percentile, opened, largest component)
// keeps the whole ellipsoid. Each voxel inside carries temporally AR(1)
// noise (ρ = 0.3, sd 15), two spheres respond to the two conditions (2 % and
// 1.5 % of the baseline, shaped by the design's own regressors), and a slow
// linear drift is added. Values are rounded to int16.
func generateRun(dir string, spec runSpec) (*synthRun, error) {
	a, b, block := blocks(spec)
	if len(a) == 0 {
		return nil, fmt.Errorf("bench: run of %d volumes at TR %g s is too short for a block design", spec.Volumes, spec.TR)
	}
	sr := &synthRun{Spec: spec, Contrast: contrast, Conditions: []string{condA, condB}, BlockSec: block}
	sr.Bold = filepath.Join(dir, "bold.nii.gz")
	sr.Events = filepath.Join(dir, "events.tsv")
	sr.Confounds = filepath.Join(dir, "confounds.tsv")

	// events.tsv
	var ev strings.Builder
	ev.WriteString("onset\tduration\ttrial_type\n")
	for i := range a {
		fmt.Fprintf(&ev, "%g\t%g\t%s\n%g\t%g\t%s\n", a[i], block, condA, b[i], block, condB)
	}
	if err := os.WriteFile(sr.Events, []byte(ev.String()), 0o644); err != nil {
		return nil, err
	}

	// confounds.tsv: six small random walks (mm and degrees).
	rng := rand.New(rand.NewPCG(spec.Seed, 0x636f6e66))
	var cf strings.Builder
	cf.WriteString("trans_x\ttrans_y\ttrans_z\trot_x\trot_y\trot_z\n")
	var walk [6]float64
	for t := 0; t < spec.Volumes; t++ {
		for c := range walk {
			if t > 0 {
				walk[c] += 0.01 * rng.NormFloat64()
			}
			if c > 0 {
				cf.WriteByte('\t')
			}
			fmt.Fprintf(&cf, "%.5f", walk[c])
		}
		cf.WriteByte('\n')
	}
	if err := os.WriteFile(sr.Confounds, []byte(cf.String()), 0o644); err != nil {
		return nil, err
	}

	// The task regressors, from the same design code the fit uses (no drift).
	des, err := design.Build([]design.Condition{
		{Name: condA, Onsets: a, Durations: fill(len(a), block)},
		{Name: condB, Onsets: b, Durations: fill(len(b), block)},
	}, design.Options{Volumes: spec.Volumes, TR: spec.TR})
	if err != nil {
		return nil, fmt.Errorf("bench: design of the synthetic run: %w", err)
	}
	regA := make([]float32, spec.Volumes)
	regB := make([]float32, spec.Volumes)
	for t := range regA {
		regA[t] = float32(des.X.At(t, 0))
		regB[t] = float32(des.X.At(t, 1))
	}

	// Baseline, head mask and the two effect maps.
	nx, ny, nz := spec.Dims[0], spec.Dims[1], spec.Dims[2]
	n := spec.voxels()
	base := make([]float32, n)
	effA := make([]float32, n)
	effB := make([]float32, n)
	head := make([]bool, n)
	inside := 0
	for k := 0; k < nz; k++ {
		for j := 0; j < ny; j++ {
			for i := 0; i < nx; i++ {
				idx := i + nx*(j+ny*k)
				x := (float64(i) + 0.5 - float64(nx)/2) / (0.45 * float64(nx))
				y := (float64(j) + 0.5 - float64(ny)/2) / (0.475 * float64(ny))
				z := (float64(k) + 0.5 - float64(nz)/2) / (0.45 * float64(nz))
				r2 := x*x + y*y + z*z
				if r2 > 1 {
					base[idx] = 20
					continue
				}
				head[idx] = true
				inside++
				v := 1000 + 120*math.Sin(3*x)*math.Cos(2.5*y) + 80*math.Cos(4*z+x) + 150*r2
				base[idx] = float32(v)
				// Two spheres of radius 0.22 (in head units) left and right.
				if d := (x-0.4)*(x-0.4) + y*y + (z-0.1)*(z-0.1); d < 0.22*0.22 {
					effA[idx] = float32(0.02 * v)
					sr.ActiveVoxels++
				}
				if d := (x+0.4)*(x+0.4) + y*y + (z-0.1)*(z-0.1); d < 0.22*0.22 {
					effB[idx] = float32(0.015 * v)
					sr.ActiveVoxels++
				}
			}
		}
	}
	sr.HeadFraction = float64(inside) / float64(n)

	f, err := os.Create(sr.Bold)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	bw := bufio.NewWriterSize(f, 1<<20)
	g := gridFor(spec.Dims, spec.VoxelMM)
	w, err := nifti.NewWriter(bw, g, spec.Volumes, spec.TR, nifti.WriteOptions{Datatype: nifti.Int16, Descrip: "winnow bench synthetic run"})
	if err != nil {
		return nil, err
	}

	// Volumes are made on one goroutine and compressed on another.
	const ahead = 3
	free := make(chan []float32, ahead)
	full := make(chan []float32, ahead)
	for range ahead {
		free <- make([]float32, n)
	}
	genErr := make(chan error, 1)
	go func() {
		r := rand.New(rand.NewPCG(spec.Seed, 0x626f6c64))
		noise := make([]float32, n)
		const rho, sd, bgSD = 0.3, 15.0, 5.0
		innov := float32(sd * math.Sqrt(1-rho*rho))
		for t := 0; t < spec.Volumes; t++ {
			vol := <-free
			drift := float32(0.02 * float64(t) / float64(spec.Volumes))
			ra, rb := regA[t], regB[t]
			var bits uint64
			for i := 0; i < n; i++ {
				if i&3 == 0 {
					bits = r.Uint64()
				}
				z := gaussTable[uint16(bits)]
				bits >>= 16
				if !head[i] {
					v := base[i] + bgSD*z
					if v < 0 {
						v = -v
					}
					vol[i] = v
					continue
				}
				var e float32
				if t == 0 {
					e = float32(sd) * z
				} else {
					e = rho*noise[i] + innov*z
				}
				noise[i] = e
				vol[i] = base[i]*(1+drift) + ra*effA[i] + rb*effB[i] + e
			}
			full <- vol
		}
		close(full)
		genErr <- nil
	}()
	for vol := range full {
		if err := w.WriteVolume(vol); err != nil {
			// Let the generator finish into the void, then report.
			go func() {
				for range full {
				}
			}()
			return nil, err
		}
		free <- vol
	}
	if err := <-genErr; err != nil {
		return nil, err
	}
	if err := w.Close(); err != nil {
		return nil, err
	}
	if err := bw.Flush(); err != nil {
		return nil, err
	}
	if err := f.Close(); err != nil {
		return nil, err
	}
	st, err := os.Stat(sr.Bold)
	if err != nil {
		return nil, err
	}
	sr.CompressedB = st.Size()
	return sr, nil
}

func fill(n int, v float64) []float64 {
	out := make([]float64, n)
	for i := range out {
		out[i] = v
	}
	return out
}

// gridFor is an axis-aligned grid centred on the origin.
func gridFor(dims [3]int, mm [3]float64) nifti.Grid {
	var aff [4][4]float64
	for a := 0; a < 3; a++ {
		aff[a][a] = mm[a]
		aff[a][3] = -mm[a] * float64(dims[a]-1) / 2
	}
	aff[3][3] = 1
	return nifti.Grid{
		Dims: dims, VoxelMM: mm, Affine: aff,
		QformCode: 2, SformCode: 2,
		QOffsetX: aff[0][3], QOffsetY: aff[1][3], QOffsetZ: aff[2][3], Qfac: 1,
		Srow: [3][4]float64{aff[0], aff[1], aff[2]},
	}
}

// smoothMap is unit-variance smooth Gaussian noise (white noise blurred with
// a Gaussian of sigma voxels) plus positive Gaussian blobs of amplitude 3 to
// 5 placed at fixed fractions of the grid: a statistic-like map for TFCE.
func smoothMap(dims [3]int, sigma float64, seed uint64) []float32 {
	n := dims[0] * dims[1] * dims[2]
	r := rand.New(rand.NewPCG(seed, 0x74666365))
	white := make([]float64, n)
	for i := range white {
		white[i] = r.NormFloat64()
	}
	all := make([]bool, n)
	for i := range all {
		all[i] = true
	}
	sm := smooth.New(dims, [3]float64{sigma, sigma, sigma}, all)
	out := make([]float64, n)
	sm.Float64(out, white)
	var ss float64
	for _, v := range out {
		ss += v * v
	}
	scale := 1 / math.Sqrt(ss/float64(n))
	nx, ny := dims[0], dims[1]
	fx, fy, fz := float64(dims[0]), float64(dims[1]), float64(dims[2])
	blobs := [][5]float64{ // centre as fractions of the grid, radius (voxels), amplitude
		{0.27, 0.34, 0.32, 4, 5}, {0.68, 0.54, 0.54, 3, 4}, {0.5, 0.81, 0.76, 5, 3}, {0.81, 0.2, 0.22, 3, 4.5},
	}
	res := make([]float32, n)
	for v := range out {
		i, j, k := float64(v%nx), float64((v/nx)%ny), float64(v/(nx*ny))
		val := out[v] * scale
		for _, b := range blobs {
			di, dj, dk := i-b[0]*fx, j-b[1]*fy, k-b[2]*fz
			val += b[4] * math.Exp(-(di*di+dj*dj+dk*dk)/(2*b[3]*b[3]))
		}
		res[v] = float32(val)
	}
	return res
}
