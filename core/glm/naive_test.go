package glm

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"

	"winnow/core/smooth"
)

// synthDesign: intercept (optional), a block regressor, a sinusoid, a cosine drift and a
// random confound.
func synthDesign(n int, intercept bool, r *rand.Rand) *mat.Dense {
	cols := [][]float64{}
	if intercept {
		c := make([]float64, n)
		for t := range c {
			c[t] = 1
		}
		cols = append(cols, c)
	}
	blk, sn, cs, rn := make([]float64, n), make([]float64, n), make([]float64, n), make([]float64, n)
	for t := 0; t < n; t++ {
		if (t/10)%2 == 1 {
			blk[t] = 1
		}
		sn[t] = math.Sin(2 * math.Pi * float64(t) / 17)
		cs[t] = math.Cos(math.Pi * (float64(t) + 0.5) / float64(n))
		rn[t] = r.NormFloat64()
	}
	cols = append(cols, blk, sn, cs, rn)
	x := mat.NewDense(n, len(cols), nil)
	for j, c := range cols {
		x.SetCol(j, c)
	}
	return x
}

type synthRun struct {
	dims   [3]int
	voxels []int32
	x      *mat.Dense
	vols   [][]float32
}

// newSynthRun: baseline 1000, AR(1) noise with a per-voxel ρ in [−0.3, 0.8], a shared
// component between neighbours so the residuals are spatially correlated, some signal.
func newSynthRun(seed uint64, n int, intercept bool) *synthRun {
	r := rand.New(rand.NewPCG(seed, 7))
	s := &synthRun{dims: [3]int{5, 4, 3}}
	g := s.dims[0] * s.dims[1] * s.dims[2]
	for i := 0; i < g; i++ {
		if i%7 != 3 { // leave holes so some pairs are missing
			s.voxels = append(s.voxels, int32(i))
		}
	}
	s.x = synthDesign(n, intercept, r)
	_, p := s.x.Dims()
	rho := make([]float64, g)
	beta := make([][]float64, g)
	for i := range rho {
		rho[i] = -0.3 + 1.1*r.Float64()
		beta[i] = make([]float64, p)
		for j := range beta[i] {
			beta[i][j] = 2 * r.NormFloat64()
		}
	}
	e := make([]float64, g)
	for t := 0; t < n; t++ {
		w := make([]float64, g)
		for i := range w {
			w[i] = r.NormFloat64()
		}
		vol := make([]float32, g)
		for i := range vol {
			sh := w[i]
			if i+1 < g {
				sh += 0.7 * w[i+1]
			}
			if i >= 5 {
				sh += 0.5 * w[i-5]
			}
			e[i] = rho[i]*e[i] + 3*sh
			y := 1000 + e[i]
			for j := 0; j < p; j++ {
				y += s.x.At(t, j) * beta[i][j]
			}
			vol[i] = float32(y)
		}
		s.vols = append(s.vols, vol)
	}
	return s
}

func (s *synthRun) fit(t *testing.T, opt Options) (*Fit, *Accumulator) {
	t.Helper()
	a := NewAccumulator(s.x, s.dims, s.voxels)
	for _, v := range s.vols {
		a.AddVolume(v)
	}
	f, err := a.Fit(opt)
	if err != nil {
		t.Fatal(err)
	}
	return f, a
}

func (s *synthRun) series(g int32) *mat.VecDense {
	y := mat.NewVecDense(len(s.vols), nil)
	for t, v := range s.vols {
		y.SetVec(t, float64(v[g]))
	}
	return y
}

// pwMatrix is the explicit n x n Prais–Winsten whitening matrix (methods notes §d.2).
func pwMatrix(n int, rho float64) *mat.Dense {
	w := mat.NewDense(n, n, nil)
	w.Set(0, 0, math.Sqrt(1-rho*rho))
	for t := 1; t < n; t++ {
		w.Set(t, t, 1)
		w.Set(t, t-1, -rho)
	}
	return w
}

// explicitM is the bias matrix from explicit n x n traces (methods notes §d.3).
func explicitM(x *mat.Dense) [2][2]float64 {
	n, _ := x.Dims()
	var xtx, inv, h, rr mat.Dense
	xtx.Mul(x.T(), x)
	if err := inv.Inverse(&xtx); err != nil {
		panic(err)
	}
	h.Product(x, &inv, x.T())
	id := mat.NewDiagDense(n, nil)
	for i := 0; i < n; i++ {
		id.SetDiag(i, 1)
	}
	rr.Sub(id, &h)
	S := mat.NewDense(n, n, nil)
	for t := 1; t < n; t++ {
		S.Set(t, t-1, 1)
	}
	var sst, rs, rsst, rsr, rsrsst mat.Dense
	sst.Add(S, S.T())
	rs.Mul(&rr, S)
	rsst.Mul(&rr, &sst)
	rsr.Mul(&rs, &rr)
	rsrsst.Mul(&rsr, &sst)
	return [2][2]float64{{mat.Trace(&rr), mat.Trace(&rsst)}, {mat.Trace(&rs), mat.Trace(&rsrsst)}}
}

type naiveOut struct {
	beta          []float64
	rss, t, fstat float64
	resid         []float64
	a0, a1, rhoBR float64
}

// naiveFit: two-pass float64 reference with explicit residuals and explicit whitening.
func naiveFit(x *mat.Dense, y *mat.VecDense, rho float64, m [2][2]float64, c []float64, cf [][]float64) naiveOut {
	n, p := x.Dims()
	var o naiveOut
	// OLS residuals for a0, a1.
	var b mat.VecDense
	if err := b.SolveVec(x, y); err != nil {
		panic(err)
	}
	var r mat.VecDense
	r.MulVec(x, &b)
	r.SubVec(y, &r)
	for t := 0; t < n; t++ {
		o.a0 += r.AtVec(t) * r.AtVec(t)
		if t > 0 {
			o.a1 += r.AtVec(t) * r.AtVec(t-1)
		}
	}
	det := m[0][0]*m[1][1] - m[0][1]*m[1][0]
	v0 := (m[1][1]*o.a0 - m[0][1]*o.a1) / det
	v1 := (-m[1][0]*o.a0 + m[0][0]*o.a1) / det
	o.rhoBR = v1 / v0
	// GLS at rho.
	w := pwMatrix(n, rho)
	var xw mat.Dense
	xw.Mul(w, x)
	var yw mat.VecDense
	yw.MulVec(w, y)
	var bw mat.VecDense
	if err := bw.SolveVec(&xw, &yw); err != nil {
		panic(err)
	}
	var rw mat.VecDense
	rw.MulVec(&xw, &bw)
	rw.SubVec(&yw, &rw)
	o.resid = make([]float64, n)
	for t := 0; t < n; t++ {
		o.resid[t] = rw.AtVec(t)
		o.rss += o.resid[t] * o.resid[t]
	}
	o.beta = make([]float64, p)
	for j := range o.beta {
		o.beta[j] = bw.AtVec(j)
	}
	s2 := o.rss / float64(n-p)
	var g, gi mat.Dense
	g.Mul(xw.T(), &xw)
	if err := gi.Inverse(&g); err != nil {
		panic(err)
	}
	cv := mat.NewVecDense(p, c)
	o.t = mat.Dot(cv, &bw) / math.Sqrt(s2*mat.Inner(cv, &gi, cv))
	C := mat.NewDense(len(cf), p, nil)
	for i, row := range cf {
		C.SetRow(i, row)
	}
	var cb mat.VecDense
	cb.MulVec(C, &bw)
	var v, vi mat.Dense
	v.Product(C, &gi, C.T())
	if err := vi.Inverse(&v); err != nil {
		panic(err)
	}
	o.fstat = mat.Inner(&cb, &vi, &cb) / (float64(len(cf)) * s2)
	return o
}

// naiveFWHM: standardised residuals, mean squared neighbour difference, log form with the
// ν/(ν+1) correction (methods notes §f.1), from explicit residual series.
func naiveFWHM(s *synthRun, res map[int32][]float64, nu float64) [3]float64 {
	nx, ny, nz := s.dims[0], s.dims[1], s.dims[2]
	var out [3]float64
	for ax := 0; ax < 3; ax++ {
		sum, cnt := 0.0, 0
		for g, rv := range res {
			i, j, k := int(g)%nx, (int(g)/nx)%ny, int(g)/(nx*ny)
			var h int
			switch ax {
			case 0:
				if i+1 >= nx {
					continue
				}
				h = int(g) + 1
			case 1:
				if j+1 >= ny {
					continue
				}
				h = int(g) + nx
			case 2:
				if k+1 >= nz {
					continue
				}
				h = int(g) + nx*ny
			}
			rw, ok := res[int32(h)]
			if !ok {
				continue
			}
			nv, nw := 0.0, 0.0
			for t := range rv {
				nv += rv[t] * rv[t]
				nw += rw[t] * rw[t]
			}
			d := 0.0
			for t := range rv {
				q := rw[t]/math.Sqrt(nw) - rv[t]/math.Sqrt(nv)
				d += q * q
			}
			sum += d
			cnt++
		}
		dc := sum / float64(cnt) * nu / (nu + 1)
		out[ax] = math.Sqrt(-2 * math.Ln2 / math.Log(1-dc/2))
	}
	return out
}

// The streaming single-pass fit against a naive two-pass float64 reference (explicit
// residuals, explicit Prais–Winsten matrix, explicit n x n traces for M) on random data with
// a baseline of 1000 (methods notes §d.4, §d.5, §f.2 identities).
func TestStreamingAgainstNaive(t *testing.T) {
	for _, tc := range []struct {
		name      string
		intercept bool
		noise     Noise
		tol       float64
	}{
		{"ar1", true, NoiseAR1, 1e-8},
		{"ols", true, NoiseOLS, 1e-8},
		// Without a constant the offset cannot be used; the raw sums lose ~6 digits at a
		// baseline of 1000 (methods notes §d.5), hence the looser tolerance.
		{"ar1-no-intercept", false, NoiseAR1, 1e-5},
	} {
		t.Run(tc.name, func(t *testing.T) {
			s := newSynthRun(11, 90, tc.intercept)
			_, p := s.x.Dims()
			c := make([]float64, p)
			c[p-4], c[p-3] = 1, -1
			cf := [][]float64{make([]float64, p), make([]float64, p)}
			cf[0][p-4], cf[1][p-3] = 1, 1
			f, _ := s.fit(t, Options{Noise: tc.noise, RhoFWHMmm: 6, VoxelMM: [3]float64{3, 3, 3},
				Contrasts: [][][]float64{{c}, cf}})
			if f.Excluded != 0 {
				t.Fatalf("excluded %d", f.Excluded)
			}
			m := explicitM(s.x)
			// ρ map used = the per-voxel estimates smoothed within the mask (package smooth).
			if tc.noise == NoiseAR1 {
				g := s.dims[0] * s.dims[1] * s.dims[2]
				mask := make([]bool, g)
				full := make([]float64, g)
				for v, gi := range s.voxels {
					mask[gi] = true
					full[gi] = f.RhoVoxel[v]
				}
				smooth.New(s.dims, smooth.Sigmas(6, [3]float64{3, 3, 3}), mask).Float64(full, full)
				for v, gi := range s.voxels {
					checkRel(t, "smoothed rho", f.Rho[v], min(max(full[gi], RhoMin), RhoMax), 1e-12)
				}
			}
			res := map[int32][]float64{}
			for v, g := range s.voxels {
				o := naiveFit(s.x, s.series(g), f.Rho[v], m, c, cf)
				res[g] = o.resid
				checkRel(t, "rho (bias-reduced, clamped)", f.RhoVoxel[v], min(max(o.rhoBR, RhoMin), RhoMax), tc.tol)
				for j := 0; j < p; j++ {
					checkRel(t, "beta", f.Beta(j)[v], o.beta[j], tc.tol)
				}
				checkRel(t, "rss", f.Sigma2[v]*f.DF, o.rss, tc.tol)
				checkRel(t, "t", f.Stats[0].Stat[v], o.t, tc.tol)
				checkRel(t, "F", f.Stats[1].Stat[v], o.fstat, tc.tol)
			}
			want := naiveFWHM(s, res, f.DF)
			for ax := 0; ax < 3; ax++ {
				checkRel(t, "FWHM", f.FWHMVoxels[ax], want[ax], tc.tol)
			}
			t.Logf("FWHM voxels %.4f %.4f %.4f", f.FWHMVoxels[0], f.FWHMVoxels[1], f.FWHMVoxels[2])
		})
	}
}

// Identity (methods notes §c.3): an F contrast of one row equals t², with df (1, ν); and a
// redundant row does not change F (q* = rank).
func TestFOneRowAndRank(t *testing.T) {
	s := newSynthRun(3, 60, true)
	_, p := s.x.Dims()
	c := make([]float64, p)
	c[1] = 1
	c2 := make([]float64, p)
	c2[1] = 2
	d := make([]float64, p)
	d[2] = 1
	f, _ := s.fit(t, Options{RhoFWHMmm: -1, Contrasts: [][][]float64{{c}, {c, c2}, {c, d}, {c, d, c2}}})
	if f.Stats[1].DF1 != 1 || f.Stats[2].DF1 != 2 || f.Stats[3].DF1 != 2 {
		t.Fatalf("df1 = %g %g %g, want 1 2 2", f.Stats[1].DF1, f.Stats[2].DF1, f.Stats[3].DF1)
	}
	for v := range f.Voxels {
		tv := f.Stats[0].Stat[v]
		checkRel(t, "F(1 row rank) = t²", f.Stats[1].Stat[v], tv*tv, 1e-10)
		checkRel(t, "F redundant row", f.Stats[3].Stat[v], f.Stats[2].Stat[v], 1e-10)
	}
}
