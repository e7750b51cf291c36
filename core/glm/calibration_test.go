package glm

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/stat/distuv"

	"winnow/core/smooth"
)

// nullDesign: a 20 s on / 20 s off block convolved with a gamma-shaped response (TR 2 s),
// floor(2·n·TR/128) discrete cosines and an intercept (methods notes §a, §b; shapes are common
// practice).
func nullDesign(n int, tr float64) *mat.Dense {
	k := int(2 * float64(n) * tr / 128)
	x := mat.NewDense(n, 2+k, nil)
	for t := 0; t < n; t++ {
		v := 0.0
		for s := 0; s <= t; s++ {
			if (s/10)%2 == 1 {
				u := float64(t-s) * tr
				v += math.Pow(u, 5) * math.Exp(-u) / 120 * tr
			}
		}
		x.Set(t, 0, v)
		for c := 1; c <= k; c++ {
			x.Set(t, c, math.Sqrt(2/float64(n))*math.Cos(math.Pi*float64(c)*(2*float64(t)+1)/(2*float64(n))))
		}
		x.Set(t, 1+k, 1)
	}
	return x
}

// zFromT converts t to z through the lower tail of the smaller side (no 1 − cdf near 1).
func zFromT(t, df float64) float64 {
	st := distuv.StudentsT{Mu: 0, Sigma: 1, Nu: df}
	z := -distuv.UnitNormal.Quantile(st.CDF(-math.Abs(t)))
	if t < 0 {
		return -z
	}
	return z
}

// Calibration on synthetic null runs (common practice): spatially smooth AR(1) noise with
// ρ between 0.3 and 0.5, 24x24x16 grid, 150 volumes. Under AR(1) the in-mask z must have SD in
// [0.95, 1.08] and a share beyond ±3.09 within a binomial band around 0.002; under OLS the SD
// must be clearly above 1.
func TestNullCalibration(t *testing.T) {
	if testing.Short() {
		t.Skip("calibration skipped in -short mode")
	}
	dims := [3]int{24, 24, 16}
	nx, ny, nz := dims[0], dims[1], dims[2]
	g := nx * ny * nz
	const n, runs = 150, 8
	x := nullDesign(n, 2)
	_, p := x.Dims()
	c := make([]float64, p)
	c[0] = 1
	var voxels []int32
	mask := make([]bool, g)
	for k := 0; k < nz; k++ {
		for j := 0; j < ny; j++ {
			for i := 0; i < nx; i++ {
				a, b, e := (float64(i)-11.5)/12, (float64(j)-11.5)/12, (float64(k)-7.5)/8
				if a*a+b*b+e*e <= 1 {
					idx := i + nx*(j+ny*k)
					mask[idx] = true
					voxels = append(voxels, int32(idx))
				}
			}
		}
	}
	rho := make([]float64, g)
	for idx := range rho {
		i, k := idx%nx, idx/(nx*ny)
		rho[idx] = 0.3 + 0.2*(0.5*float64(k)/float64(nz-1)+0.5*float64(i)/float64(nx-1))
	}
	sm := smooth.New(dims, [3]float64{0.8, 0.8, 0.8}, nil)
	// unit marginal variance of the smoothed white noise: 1/Σw² over the 3D kernel
	k1 := smooth.Kernel(0.8)
	s2 := 0.0
	for _, w := range k1 {
		s2 += w * w
	}
	scale := 1 / math.Sqrt(s2*s2*s2)

	var zAR, zOLS []float64
	var fwhm [3]float64
	for run := 0; run < runs; run++ {
		r := rand.New(rand.NewPCG(uint64(100+run), 9))
		a := NewAccumulator(x, dims, voxels)
		e := make([]float64, g)
		w := make([]float64, g)
		vol := make([]float32, g)
		for tt := 0; tt < n; tt++ {
			for i := range w {
				w[i] = r.NormFloat64()
			}
			sm.Float64(w, w) // interior voxels: exact Gaussian smoothing; edges renormalised
			for i := range e {
				eta := w[i] * scale
				if tt == 0 {
					e[i] = eta
				} else {
					e[i] = rho[i]*e[i] + math.Sqrt(1-rho[i]*rho[i])*eta
				}
				vol[i] = float32(1000 + 5*e[i])
			}
			a.AddVolume(vol)
		}
		for _, noise := range []Noise{NoiseAR1, NoiseOLS} {
			f, err := a.Fit(Options{Noise: noise, VoxelMM: [3]float64{3, 3, 3}, Contrasts: [][][]float64{{c}}})
			if err != nil {
				t.Fatal(err)
			}
			if f.Excluded != 0 {
				t.Fatalf("excluded %d", f.Excluded)
			}
			for v := range f.Voxels {
				z := zFromT(f.Stats[0].Stat[v], f.DF)
				if noise == NoiseAR1 {
					zAR = append(zAR, z)
				} else {
					zOLS = append(zOLS, z)
				}
			}
			if noise == NoiseAR1 {
				for ax := range fwhm {
					fwhm[ax] += f.FWHMVoxels[ax] / runs
				}
			}
		}
	}
	sd := func(z []float64) float64 {
		m, s := 0.0, 0.0
		for _, v := range z {
			m += v
		}
		m /= float64(len(z))
		for _, v := range z {
			s += (v - m) * (v - m)
		}
		return math.Sqrt(s / float64(len(z)-1))
	}
	share := func(z []float64) float64 {
		k := 0
		for _, v := range z {
			if math.Abs(v) > 3.090232306167814 {
				k++
			}
		}
		return float64(k) / float64(len(z))
	}
	sdAR, sdOLS := sd(zAR), sd(zOLS)
	shAR, shOLS := share(zAR), share(zOLS)
	// Binomial band (3 SD) around 0.002 with the count deflated by the voxels per resel,
	// FWHM_x·FWHM_y·FWHM_z, as the effective number of independent tests (from memory).
	neff := float64(len(zAR)) / (fwhm[0] * fwhm[1] * fwhm[2])
	half := 3 * math.Sqrt(0.002*0.998/neff)
	t.Logf("voxels %d x %d runs; residual FWHM (vox) %.2f %.2f %.2f; effective tests %.0f",
		len(voxels), runs, fwhm[0], fwhm[1], fwhm[2], neff)
	t.Logf("AR1: SD %.4f, share |z|>3.09 %.5f (band %.5f..%.5f); OLS: SD %.4f, share %.5f",
		sdAR, shAR, max(0, 0.002-half), 0.002+half, sdOLS, shOLS)
	if sdAR < 0.95 || sdAR > 1.08 {
		t.Errorf("AR(1) null z SD = %.4f, want within [0.95, 1.08]", sdAR)
	}
	if math.Abs(shAR-0.002) > half {
		t.Errorf("AR(1) share beyond ±3.09 = %.5f, want 0.002 ± %.5f", shAR, half)
	}
	// The noise was smoothed by a Gaussian of σ = 0.8 voxel: FWHM 0.8·sqrt(8 ln 2) = 1.884
	// voxels (exact for a Gaussian). Methods notes §f.1: below about 2 voxels the estimators are
	// off by up to 5–10 %, so allow 10 %.
	for ax, fw := range fwhm {
		if want := 0.8 * math.Sqrt(8*math.Ln2); math.Abs(fw-want) > 0.1*want {
			t.Errorf("residual FWHM axis %d = %.3f voxels, want %.3f ± 10%%", ax, fw, want)
		}
	}
	if sdOLS < 1.15 {
		t.Errorf("OLS null z SD = %.4f, want clearly above 1 (> 1.15) under AR(1) noise", sdOLS)
	}
}
