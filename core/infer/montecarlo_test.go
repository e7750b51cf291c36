package infer

import (
	"math"
	"math/rand/v2"
	"runtime"
	"testing"

	"winnow/core/dist"
)

// gaussKernel is a sampled Gaussian of the given FWHM (voxels), truncated at 4σ.
func gaussKernel(fwhm float64) []float64 {
	sigma := fwhm / math.Sqrt(8*math.Ln2)
	r := int(math.Ceil(4 * sigma))
	k := make([]float64, 2*r+1)
	for i := range k {
		x := float64(i - r)
		k[i] = math.Exp(-x * x / (2 * sigma * sigma))
	}
	return k
}

// smoothField fills out (nx·ny·nz, x fastest) with white noise smoothed by k along each axis,
// using "valid" convolution of a padded noise grid so the field is exactly stationary, and
// scales it to unit variance with the kernel's norm. buf and tmp are scratch.
func smoothField(rng *rand.Rand, k []float64, dims [3]int, out, buf, tmp []float64) {
	r := len(k) / 2
	px, py, pz := dims[0]+2*r, dims[1]+2*r, dims[2]+2*r
	noise := buf[:px*py*pz]
	for i := range noise {
		noise[i] = rng.NormFloat64()
	}
	// x pass: (px,py,pz) -> (nx,py,pz)
	nx := dims[0]
	a := tmp[:nx*py*pz]
	for row := 0; row < py*pz; row++ {
		src := noise[row*px : (row+1)*px]
		dst := a[row*nx : (row+1)*nx]
		for i := range dst {
			s := 0.0
			w := src[i : i+len(k)]
			for q, kv := range k {
				s += kv * w[q]
			}
			dst[i] = s
		}
	}
	// y pass: (nx,py,pz) -> (nx,ny,pz), accumulating whole rows (long contiguous loops).
	ny := dims[1]
	b := noise[:nx*ny*pz]
	for i := range b {
		b[i] = 0
	}
	for z := 0; z < pz; z++ {
		for y := 0; y < ny; y++ {
			dst := b[nx*(y+ny*z) : nx*(y+ny*z)+nx]
			for q, kv := range k {
				src := a[nx*(y+q+py*z) : nx*(y+q+py*z)+nx]
				for i := range dst {
					dst[i] += kv * src[i]
				}
			}
		}
	}
	// z pass: (nx,ny,pz) -> (nx,ny,nz)
	plane := nx * ny
	for i := range out {
		out[i] = 0
	}
	for z := 0; z < dims[2]; z++ {
		dst := out[plane*z : plane*(z+1)]
		for q, kv := range k {
			src := b[plane*(z+q) : plane*(z+q+1)]
			for i := range dst {
				dst[i] += kv * src[i]
			}
		}
	}
	n2 := 0.0
	for _, kv := range k {
		n2 += kv * kv
	}
	scale := 1 / math.Pow(n2, 1.5)
	for i := range out {
		out[i] *= scale
	}
}

// kernelFWHM is the FWHM (voxels) of the field made with kernel k, from the exact lag-1
// correlation of the sampled kernel, ρ1 = Σ k_i k_{i+1} / Σ k_i², and the Gaussian relation
// ρ1 = exp(-2 ln 2 / f²) (methods f.1).
func kernelFWHM(k []float64) float64 {
	var n2, c1 float64
	for i, v := range k {
		n2 += v * v
		if i+1 < len(k) {
			c1 += v * k[i+1]
		}
	}
	return math.Sqrt(-2 * math.Ln2 / math.Log(c1/n2))
}

// Monte Carlo check of voxel-level FWE (RFT, Bonferroni, their minimum) and of the FDR of BH
// on smooth Gaussian noise fields generated here. The bounds are the nominal level plus a
// one-sided 99 % binomial (or normal, for the FDP mean) margin. Source of the claims: RFT and
// Bonferroni bound the FWE from above (Worsley et al. 1996; methods f.5); BH controls FDR at
// π0·q under positive dependence (Benjamini & Yekutieli 2001; methods h).
func TestMonteCarloFWEAndFDR(t *testing.T) {
	nFields := 300
	if runtime.GOOS == "js" {
		if testing.Short() {
			t.Skip("Monte Carlo skipped under js with -short")
		}
		// Go's wasm output is several times slower: a smoke run with a wide margin.
		nFields = 40
	}
	const alpha = 0.05
	dims := [3]int{32, 32, 24}
	nv := dims[0] * dims[1] * dims[2]
	k := gaussKernel(4)
	fw := kernelFWHM(k)
	if math.Abs(fw-4) > 0.02 {
		t.Fatalf("kernel FWHM %g, want 4", fw)
	}
	mask := make([]bool, nv)
	for i := range mask {
		mask[i] = true
	}
	R := CountResels(mask, dims, [3]float64{fw, fw, fw})
	z := Field{Kind: FieldZ}
	v, err := VoxelThreshold(R, z, nv, alpha)
	if err != nil {
		t.Fatal(err)
	}
	// Planted signal for the FDR part: an 8×8×6 block of +4 (in noise SD units).
	truth := make([]bool, nv)
	for kz := 8; kz < 14; kz++ {
		for j := 8; j < 16; j++ {
			for i := 8; i < 16; i++ {
				truth[i+dims[0]*(j+dims[1]*kz)] = true
			}
		}
	}
	r := len(k) / 2
	pad := (dims[0] + 2*r) * (dims[1] + 2*r) * (dims[2] + 2*r)
	buf, tmp := make([]float64, pad), make([]float64, pad)
	field := make([]float64, nv)
	logp := make([]float64, nv)
	rng := rand.New(rand.NewPCG(20261201, 7))

	var hitRFT, hitBonf, hitMin, hitBonfFn int
	var sumFDP, sumFDP2, sumTP float64
	nFDR := 0
	for n := 0; n < nFields; n++ {
		smoothField(rng, k, dims, field, buf, tmp)
		max := math.Inf(-1)
		for _, x := range field {
			max = math.Max(max, x)
		}
		if max >= v.RFT {
			hitRFT++
		}
		if max >= v.Bonferroni {
			hitBonf++
		}
		if max >= v.Threshold {
			hitMin++
		}
		for i, x := range field {
			logp[i] = dist.NormLogSF(x)
		}
		if Bonferroni(logp, alpha).Rejected > 0 {
			hitBonfFn++
		}
		// FDR on the same noise with the planted block.
		nFDR++
		for i, x := range field {
			if truth[i] {
				x += 4
			}
			logp[i] = dist.NormLogSF(x)
		}
		a := BH(logp, alpha)
		fp, tp := 0, 0
		for i, lp := range logp {
			if lp <= a.LogPThreshold {
				if truth[i] {
					tp++
				} else {
					fp++
				}
			}
		}
		if fp+tp != a.Rejected {
			t.Fatalf("BH: %d rejected by threshold, Rejected = %d", fp+tp, a.Rejected)
		}
		fdp := float64(fp) / math.Max(1, float64(fp+tp))
		sumFDP += fdp
		sumFDP2 += fdp * fdp
		sumTP += float64(tp)
	}
	N := float64(nFields)
	bound := alpha + 2.33*math.Sqrt(alpha*(1-alpha)/N)
	fRFT, fBonf, fMin := float64(hitRFT)/N, float64(hitBonf)/N, float64(hitMin)/N
	t.Logf("%d fields %v, FWHM %.4f vox, resels %.4g: thresholds z RFT %.4f, Bonferroni %.4f", nFields, dims, fw, R[3], v.RFT, v.Bonferroni)
	t.Logf("empirical FWE at alpha 0.05: RFT %.4f, Bonferroni %.4f, min(RFT, Bonf) %.4f (bound %.4f)", fRFT, fBonf, fMin, bound)
	for _, c := range []struct {
		name string
		f    float64
	}{{"RFT", fRFT}, {"Bonferroni", fBonf}, {"min", fMin}} {
		if c.f > bound {
			t.Errorf("%s empirical FWE %.4f above %.4f", c.name, c.f, bound)
		}
	}
	// The Bonferroni adjustment on ln p rejects exactly when the maximum passes the
	// Bonferroni threshold.
	if hitBonfFn != hitBonf {
		t.Errorf("Bonferroni(): %d fields with a rejection, threshold: %d", hitBonfFn, hitBonf)
	}
	// RFT's threshold is the lower one at FWHM 4 here, so it must not be absurdly
	// conservative: some familywise errors are expected (about 0.03–0.05 in N fields).
	if v.UsedBonferroni || hitRFT < hitBonf || (nFields >= 200 && fRFT < 0.01) {
		t.Errorf("RFT FWE %.4f with threshold %.4f (Bonferroni %.4f)", fRFT, v.RFT, v.Bonferroni)
	}
	M := float64(nFDR)
	meanFDP := sumFDP / M
	sdFDP := math.Sqrt(math.Max(0, sumFDP2/M-meanFDP*meanFDP))
	fdrBound := alpha + 2.33*sdFDP/math.Sqrt(M)
	t.Logf("BH at q 0.05 with planted signal, %d fields: mean FDP %.4f (sd %.4f, bound %.4f), mean true positives %.1f of 384", nFDR, meanFDP, sdFDP, fdrBound, sumTP/M)
	if meanFDP > fdrBound {
		t.Errorf("BH mean FDP %.4f above %.4f", meanFDP, fdrBound)
	}
	if sumTP/M < 100 {
		t.Errorf("BH found only %.1f of 384 planted voxels on average", sumTP/M)
	}
}
