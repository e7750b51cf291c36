package infer

import (
	"fmt"
	"math"

	"winnow/core/dist"
)

// FieldKind names the marginal distribution of a statistic field.
type FieldKind int

// Field kinds.
const (
	FieldZ FieldKind = iota // standard normal
	FieldT                  // Student t with DF2 degrees of freedom
	FieldF                  // F with (DF1, DF2) degrees of freedom
)

// Field describes a statistic field. For FieldT the degrees of freedom are DF2 (DF1 is
// ignored; t² is F(1, DF2)); for FieldF they are (DF1, DF2), numerator first.
type Field struct {
	Kind     FieldKind
	DF1, DF2 float64
}

// Check returns an error naming the bad degrees of freedom, or nil.
func (f Field) Check() error {
	ok := func(v float64) bool { return v > 0 && !math.IsInf(v, 1) }
	switch f.Kind {
	case FieldZ:
		return nil
	case FieldT:
		if !ok(f.DF2) && !math.IsInf(f.DF2, 1) {
			return fmt.Errorf("infer: t field df = %g, want > 0", f.DF2)
		}
		return nil
	case FieldF:
		if !ok(f.DF1) || !ok(f.DF2) {
			return fmt.Errorf("infer: F field df = (%g, %g), want both > 0 and finite", f.DF1, f.DF2)
		}
		return nil
	}
	return fmt.Errorf("infer: field kind %d, want FieldZ, FieldT or FieldF", int(f.Kind))
}

// LogSF returns ln P(X >= u) for one voxel of the field.
func (f Field) LogSF(u float64) float64 {
	switch f.Kind {
	case FieldZ:
		return dist.NormLogSF(u)
	case FieldT:
		return dist.TLogSF(u, f.DF2)
	case FieldF:
		return dist.FLogSF(u, f.DF1, f.DF2)
	}
	return math.NaN()
}

// Quantile returns u with ln P(X >= u) = logp for one voxel of the field.
func (f Field) Quantile(logp float64) float64 {
	switch f.Kind {
	case FieldZ:
		return dist.ZFromLogSF(logp)
	case FieldT:
		return dist.TFromLogSF(logp, f.DF2)
	case FieldF:
		return dist.FFromLogSF(logp, f.DF1, f.DF2)
	}
	return math.NaN()
}

// lambda is 4 ln 2: the derivative variance of a unit-FWHM Gaussian-kernel field.
const lambda = 4 * math.Ln2

// ECDensities returns the Euler characteristic densities ρ0..ρ3 per resel at threshold u
// (Worsley et al. 1996; methods f.4). ρ0 is the single-voxel upper tail.
func ECDensities(f Field, u float64) [4]float64 {
	var r [4]float64
	if math.IsNaN(u) || f.Check() != nil {
		return [4]float64{math.NaN(), math.NaN(), math.NaN(), math.NaN()}
	}
	r[0] = math.Exp(f.LogSF(u))
	twoPi := 2 * math.Pi
	switch f.Kind {
	case FieldZ:
		e := math.Exp(-u * u / 2)
		r[1] = math.Sqrt(lambda) / twoPi * e
		r[2] = lambda / math.Pow(twoPi, 1.5) * u * e
		r[3] = math.Pow(lambda, 1.5) / (twoPi * twoPi) * (u*u - 1) * e
	case FieldT:
		v := f.DF2
		if math.IsInf(v, 1) || v > 1e9 {
			return ECDensities(Field{Kind: FieldZ}, u)
		}
		q := math.Exp(-(v - 1) / 2 * math.Log1p(u*u/v))
		// Γ((ν+1)/2) / Γ(ν/2) = Γ(½) / B(ν/2, ½)
		g := math.Exp(0.5*math.Log(math.Pi)-dist.LogBeta(v/2, 0.5)) / math.Sqrt(v/2)
		r[1] = math.Sqrt(lambda) / twoPi * q
		r[2] = lambda / math.Pow(twoPi, 1.5) * g * u * q
		r[3] = math.Pow(lambda, 1.5) / (twoPi * twoPi) * ((v-1)/v*u*u - 1) * q
	case FieldF:
		if u <= 0 {
			return [4]float64{1, 0, 0, 0}
		}
		k, v := f.DF1, f.DF2
		x := k * u / v
		lx := math.Log(x)
		lB := -(v + k - 2) / 2 * math.Log1p(x)
		lg := func(a float64) float64 { l, _ := math.Lgamma(a); return l }
		den := lg(v/2) + lg(k/2)
		r[1] = math.Sqrt(lambda) / math.Sqrt(twoPi) * math.Sqrt2 *
			math.Exp(lg((v+k-1)/2)-den+(k-1)/2*lx+lB)
		r[2] = lambda / twoPi * math.Exp(lg((v+k-2)/2)-den+(k-2)/2*lx+lB) * ((v-1)*x - (k - 1))
		r[3] = math.Pow(lambda, 1.5) / math.Pow(twoPi, 1.5) / math.Sqrt2 *
			math.Exp(lg((v+k-3)/2)-den+(k-3)/2*lx+lB) *
			((v-1)*(v-2)*x*x - (2*v*k-v-k-1)*x + (k-1)*(k-2))
	}
	return r
}

// Resels holds the resel counts R0..R3 of a search region (R0 is its Euler characteristic;
// R3 is the volume in resels).
type Resels [4]float64

// LatticeCounts are the counts of in-mask lattice points (P), adjacent pairs along each axis
// (E), 2×2 squares in each plane (F) and 2×2×2 cubes (C) (Worsley et al. 1996).
type LatticeCounts struct {
	P, Ex, Ey, Ez, Fxy, Fxz, Fyz, C int
}

// CountLattice counts the points, edges, faces and cubes of the mask. It panics if
// len(mask) != nx·ny·nz (a caller bug).
func CountLattice(mask []bool, dims [3]int) LatticeCounts {
	nx, ny, nz := dims[0], dims[1], dims[2]
	if nx < 0 || ny < 0 || nz < 0 || len(mask) != nx*ny*nz {
		panic(fmt.Sprintf("infer: mask has %d entries for dims %v", len(mask), dims))
	}
	var c LatticeCounts
	sx, sy := 1, nx
	sz := nx * ny
	for k := 0; k < nz; k++ {
		hasZ := k+1 < nz
		for j := 0; j < ny; j++ {
			hasY := j+1 < ny
			row := nx * (j + ny*k)
			for i := 0; i < nx; i++ {
				v := row + i
				if !mask[v] {
					continue
				}
				c.P++
				hasX := i+1 < nx
				x := hasX && mask[v+sx]
				y := hasY && mask[v+sy]
				z := hasZ && mask[v+sz]
				if x {
					c.Ex++
				}
				if y {
					c.Ey++
				}
				if z {
					c.Ez++
				}
				xy := x && y && mask[v+sx+sy]
				xz := x && z && mask[v+sx+sz]
				yz := y && z && mask[v+sy+sz]
				if xy {
					c.Fxy++
				}
				if xz {
					c.Fxz++
				}
				if yz {
					c.Fyz++
				}
				if xy && z && mask[v+sz+sx] && mask[v+sz+sy] && mask[v+sz+sx+sy] {
					c.C++
				}
			}
		}
	}
	return c
}

// Resels converts lattice counts to resel counts for smoothness fwhmVox (FWHM in voxels per
// axis). An axis with no edges contributes nothing, whatever its FWHM; a non-positive or NaN
// FWHM on an axis that is used gives NaN.
func (c LatticeCounts) Resels(fwhmVox [3]float64) Resels {
	var a [3]float64
	for j, f := range fwhmVox {
		if f > 0 {
			a[j] = 1 / f
		} else {
			a[j] = math.NaN()
		}
	}
	term := func(count int, w float64) float64 {
		if count == 0 {
			return 0
		}
		return float64(count) * w
	}
	var r Resels
	r[0] = float64(c.P - (c.Ex + c.Ey + c.Ez) + (c.Fxy + c.Fxz + c.Fyz) - c.C)
	r[1] = term(c.Ex-c.Fxy-c.Fxz+c.C, a[0]) + term(c.Ey-c.Fxy-c.Fyz+c.C, a[1]) + term(c.Ez-c.Fxz-c.Fyz+c.C, a[2])
	r[2] = term(c.Fxy-c.C, a[0]*a[1]) + term(c.Fxz-c.C, a[0]*a[2]) + term(c.Fyz-c.C, a[1]*a[2])
	r[3] = term(c.C, a[0]*a[1]*a[2])
	return r
}

// CountResels returns the resel counts of the mask for smoothness fwhmVox (methods f.3).
func CountResels(mask []bool, dims [3]int, fwhmVox [3]float64) Resels {
	return CountLattice(mask, dims).Resels(fwhmVox)
}

// ExpectedEC returns E[χ(u)] = Σ_d R_d ρ_d(u), the expected Euler characteristic of the
// excursion set above u.
func ExpectedEC(r Resels, f Field, u float64) float64 {
	rho := ECDensities(f, u)
	return r[0]*rho[0] + r[1]*rho[1] + r[2]*rho[2] + r[3]*rho[3]
}

func reselsOK(r Resels) bool {
	for _, v := range r {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return false
		}
	}
	return true
}

// largestCrossing returns the largest u >= floor with E[χ(u)] = level, or floor when
// E[χ(u)] < level on the whole scan above floor. The scan walks down from a point where
// E[χ] < level in steps of 4 % (so that a lower root of a non-monotone E[χ] at low u is not
// taken), then bisects to full precision.
func largestCrossing(r Resels, f Field, level, floor float64) float64 {
	g := func(u float64) float64 { return ExpectedEC(r, f, u) - level }
	hi := math.Max(60, 2*floor)
	for g(hi) > 0 {
		hi *= 2
		if hi > 1e100 {
			// No crossing below 1e100 (E[χ] does not fall off, e.g. t fields with df <= 3).
			return math.Inf(1)
		}
	}
	u := hi
	for {
		next := u - math.Max(0.04*math.Abs(u), 0.02)
		if next <= floor {
			next = floor
		}
		if g(next) >= 0 {
			lo, hi := next, u
			for i := 0; i < 200 && hi-lo > 1e-15*math.Abs(hi); i++ {
				mid := 0.5 * (lo + hi)
				if g(mid) >= 0 {
					lo = mid
				} else {
					hi = mid
				}
			}
			return 0.5 * (lo + hi)
		}
		if next == floor {
			return floor
		}
		u = next
	}
}

// RFTThreshold returns the voxel-level FWE threshold u on the field's own scale: the largest
// solution of E[χ(u)] = alpha, searched above the single-voxel quantile at alpha (methods
// f.5). It is never below that quantile; it is +Inf when E[χ] does not fall to alpha below
// 1e100 (t fields with df <= 3), where Bonferroni's threshold must be used. NaN for invalid
// input.
func RFTThreshold(r Resels, f Field, alpha float64) float64 {
	if !(alpha > 0 && alpha < 1) || f.Check() != nil || !reselsOK(r) {
		return math.NaN()
	}
	return largestCrossing(r, f, alpha, f.Quantile(math.Log(alpha)))
}

// PeakP returns the RFT-corrected p of a peak of height u: min(1, E[χ(u)]) in the range where
// E[χ] is below 1 and decreasing (above its largest crossing of 1), and 1 below that range,
// so a low peak never gets a small p from the non-monotone part of E[χ]. It is never below
// the single-voxel p. NaN for invalid input.
func PeakP(r Resels, f Field, u float64) float64 {
	return PeakPs(r, f, []float64{u})[0]
}

// PeakPs is PeakP for many peaks at once (the search for the crossing of 1 is done once).
func PeakPs(r Resels, f Field, us []float64) []float64 {
	out := make([]float64, len(us))
	if f.Check() != nil || !reselsOK(r) {
		for i := range out {
			out[i] = math.NaN()
		}
		return out
	}
	u1 := largestCrossing(r, f, 1, f.Quantile(-math.Ln2))
	for i, u := range us {
		switch {
		case math.IsNaN(u):
			out[i] = math.NaN()
		case u <= u1:
			out[i] = 1
		default:
			p := math.Max(ExpectedEC(r, f, u), math.Exp(f.LogSF(u)))
			out[i] = math.Min(1, p)
		}
	}
	return out
}

// BonferroniThreshold returns the single-voxel quantile at alpha/nVoxels on the field's own
// scale. It does not depend on the data. NaN for invalid input.
func BonferroniThreshold(f Field, nVoxels int, alpha float64) float64 {
	if !(alpha > 0 && alpha < 1) || nVoxels <= 0 || f.Check() != nil {
		return math.NaN()
	}
	return f.Quantile(math.Log(alpha) - math.Log(float64(nVoxels)))
}

// BonferroniP returns min(1, nVoxels·P(X >= u)), the Bonferroni-corrected p of a voxel.
func BonferroniP(f Field, nVoxels int, u float64) float64 {
	if nVoxels <= 0 || f.Check() != nil || math.IsNaN(u) {
		return math.NaN()
	}
	return math.Exp(math.Min(0, math.Log(float64(nVoxels))+f.LogSF(u)))
}

// VoxelFWE is the voxel-level familywise threshold: the RFT and Bonferroni critical values and
// the one used, the lower of the two (methods f.5).
type VoxelFWE struct {
	RFT, Bonferroni float64 // critical values on the statistic's own scale
	Threshold       float64 // min(RFT, Bonferroni)
	UsedBonferroni  bool    // the Bonferroni value was lower
}

// BonferroniUsedWarning is the note for a result whose RFT threshold was above Bonferroni's.
const BonferroniUsedWarning = "RFT threshold is above Bonferroni at this smoothness; Bonferroni's is used"

// Warning returns BonferroniUsedWarning when the Bonferroni threshold was used, else "".
func (v VoxelFWE) Warning() string {
	if v.UsedBonferroni {
		return BonferroniUsedWarning
	}
	return ""
}

// VoxelThreshold computes the voxel-level FWE threshold for a search region of nVoxels voxels
// with resels r.
func VoxelThreshold(r Resels, f Field, nVoxels int, alpha float64) (VoxelFWE, error) {
	if err := f.Check(); err != nil {
		return VoxelFWE{}, err
	}
	if !(alpha > 0 && alpha < 1) {
		return VoxelFWE{}, fmt.Errorf("infer: alpha = %g, want 0 < alpha < 1", alpha)
	}
	if nVoxels <= 0 {
		return VoxelFWE{}, fmt.Errorf("infer: %d voxels in the search region, want at least 1", nVoxels)
	}
	if !reselsOK(r) {
		return VoxelFWE{}, fmt.Errorf("infer: resel counts %v are not finite (smoothness estimate missing?)", [4]float64(r))
	}
	v := VoxelFWE{RFT: RFTThreshold(r, f, alpha), Bonferroni: BonferroniThreshold(f, nVoxels, alpha)}
	v.Threshold = v.RFT
	if v.Bonferroni < v.RFT {
		v.Threshold, v.UsedBonferroni = v.Bonferroni, true
	}
	return v, nil
}

// VoxelP returns the voxel-level FWE-corrected p of a peak of height u: min(p_RFT, p_Bonf),
// and whether the Bonferroni value was the smaller.
func VoxelP(r Resels, f Field, nVoxels int, u float64) (p float64, usedBonferroni bool) {
	pr := PeakP(r, f, u)
	pb := BonferroniP(f, nVoxels, u)
	if pb < pr {
		return pb, true
	}
	return pr, false
}
