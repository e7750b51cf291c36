package dist

import "math"

const (
	ln2      = 0.693147180559945309417232121458176568
	lnSqrt2π = 0.918938533204672741780329736405617639 // ½ ln 2π
	sqrt2    = 1.41421356237309504880168872420969808
	// asymptoticZ is where NormLogSF switches from math.Erfc to the asymptotic series.
	asymptoticZ = 30
)

// log1mexp returns ln(1 - e^x) for x <= 0, accurately for x near 0 and for x very negative.
func log1mexp(x float64) float64 {
	switch {
	case x > 0 || math.IsNaN(x):
		return math.NaN()
	case x > -ln2:
		return math.Log(-math.Expm1(x))
	default:
		return math.Log1p(-math.Exp(x))
	}
}

// NormLogSF returns ln P(Z >= z) for a standard normal Z.
func NormLogSF(z float64) float64 {
	switch {
	case math.IsNaN(z):
		return math.NaN()
	case z >= asymptoticZ:
		if math.IsInf(z, 1) {
			return math.Inf(-1)
		}
		// ln Φ̄(z) = -z²/2 - ln z - ½ ln 2π + ln(1 - z⁻² + 3z⁻⁴ - 15z⁻⁶ + 105z⁻⁸ - 945z⁻¹⁰ ...)
		w := 1 / (z * z)
		s := w * (-1 + w*(3+w*(-15+w*(105+w*(-945)))))
		return -0.5*z*z - math.Log(z) - lnSqrt2π + math.Log1p(s)
	case z >= 0:
		return math.Log(0.5 * math.Erfc(z/sqrt2))
	default:
		// P(Z >= z) = 1 - P(Z >= -z); the small term is accurate, so use log1p.
		return math.Log1p(-0.5 * math.Erfc(-z/sqrt2))
	}
}

// normLogPDF returns ln φ(z).
func normLogPDF(z float64) float64 { return -0.5*z*z - lnSqrt2π }

// ZFromLogSF returns z with ln P(Z >= z) = logp. logp = 0 gives -Inf and logp = -Inf gives
// +Inf; logp > 0 or NaN gives NaN.
func ZFromLogSF(logp float64) float64 {
	switch {
	case math.IsNaN(logp) || logp > 0:
		return math.NaN()
	case logp == 0:
		return math.Inf(-1)
	case math.IsInf(logp, -1):
		return math.Inf(1)
	case logp > -ln2:
		// p > ½: z is negative; use the lower tail, ln(1-p), which is accurate here.
		return -zUpper(log1mexp(logp))
	}
	return zUpper(logp)
}

// zUpper solves ln Φ̄(z) = L for L <= ln ½ (z >= 0) by Newton's method.
func zUpper(L float64) float64 {
	z := 0.0
	if L < -0.7 {
		A := -L
		if v := 2*A - math.Log(4*math.Pi*A); v > 0 {
			z = math.Sqrt(v)
		}
	}
	for i := 0; i < 60; i++ {
		ls := NormLogSF(z)
		f := ls - L
		// f'(z) = -φ(z)/Φ̄(z)
		d := -math.Exp(normLogPDF(z) - ls)
		step := f / d
		z -= step
		if z < 0 {
			z = 0
		}
		// Newton converges quadratically: after a step below 1e-8 the error is ~1e-16.
		if math.Abs(step) <= 1e-8*math.Max(1, z) {
			break
		}
	}
	return z
}

// LogBeta returns ln B(a, b) = ln Γ(a) + ln Γ(b) - ln Γ(a+b) for a, b > 0, accurate also
// when one argument is very large.
func LogBeta(a, b float64) float64 { return logBetaFn(a, b) }

// logBetaFn returns ln B(a, b). When the larger argument is big, ln Γ(b) - ln Γ(a+b) is
// formed from Stirling's series as a difference, avoiding the cancellation of two large
// lgamma values (which costs ~1e-16·ln Γ(b) absolute: 3e-3 at b = 5e11).
func logBetaFn(a, b float64) float64 {
	if a > b {
		a, b = b, a
	}
	la, _ := math.Lgamma(a)
	if b < 20 {
		lb, _ := math.Lgamma(b)
		lab, _ := math.Lgamma(a + b)
		return la + lb - lab
	}
	return la + lgammaDiff(b, a)
}

// stirlingCorr returns ln Γ(x) - [(x-½) ln x - x + ½ ln 2π] for x >= 20 (error < 1e-17).
func stirlingCorr(x float64) float64 {
	w := 1 / (x * x)
	return (1.0/12 + w*(-1.0/360+w*(1.0/1260+w*(-1.0/1680+w*(1.0/1188))))) / x
}

// lgammaDiff returns ln Γ(x) - ln Γ(x+s) for x >= 20, s > 0.
func lgammaDiff(x, s float64) float64 {
	return -(x-0.5)*math.Log1p(s/x) - s*math.Log(x+s) + s + stirlingCorr(x) - stirlingCorr(x+s)
}

// betaCF evaluates the continued fraction of the incomplete beta function,
// CF = 1/(1+ d1/(1+ d2/(1+ ...))), by the modified Lentz method, with
// d_{2m+1} = -(a+m)(a+b+m)x/((a+2m)(a+2m+1)) and d_{2m} = m(b-m)x/((a+2m-1)(a+2m)).
func betaCF(x, y, a, b float64) float64 {
	const tiny = 1e-300
	const eps = 2.3e-16
	qab, qap, qam := a+b, a+1, a-1
	c := 1.0
	// 1 - (a+b)x/(a+1); near x = 1 it is formed from y = 1-x, which the caller holds exactly.
	var d float64
	if x > 0.5 {
		d = ((1 - b) + qab*y) / qap
	} else {
		d = 1 - qab*x/qap
	}
	if math.Abs(d) < tiny {
		d = tiny
	}
	d = 1 / d
	h := d
	for m := 1; m <= maxCF; m++ {
		fm := float64(m)
		m2 := 2 * fm
		aa := fm * (b - fm) * x / ((qam + m2) * (a + m2))
		d = 1 + aa*d
		if math.Abs(d) < tiny {
			d = tiny
		}
		c = 1 + aa/c
		if math.Abs(c) < tiny {
			c = tiny
		}
		d = 1 / d
		h *= d * c
		aa = -(a + fm) * (qab + fm) * x / ((a + m2) * (qap + m2))
		d = 1 + aa*d
		if math.Abs(d) < tiny {
			d = tiny
		}
		c = 1 + aa/c
		if math.Abs(c) < tiny {
			c = tiny
		}
		d = 1 / d
		del := d * c
		h *= del
		if math.Abs(del-1) <= eps {
			break
		}
	}
	return h
}

// logIncBetaCF returns ln I_x(a, b) from the continued fraction; y = 1-x, lx = ln x, ly = ln y.
// Accurate when x < (a+1)/(a+b+2).
func logIncBetaCF(x, y, lx, ly, a, b float64) float64 {
	return a*lx + b*ly - math.Log(a) - logBetaFn(a, b) + math.Log(betaCF(x, y, a, b))
}

// logIncBeta returns ln I_x(a, b) and ln(1 - I_x(a, b)), given x and y = 1 - x (each formed
// directly by the caller) and their logs.
func logIncBeta(x, y, lx, ly, a, b float64) (lnI, lnJ float64) {
	if math.IsInf(lx, -1) {
		return math.Inf(-1), 0
	}
	if math.IsInf(ly, -1) {
		return 0, math.Inf(-1)
	}
	if x < (a+1)/(a+b+2) {
		lnI = logIncBetaCF(x, y, lx, ly, a, b)
		return lnI, log1mexp(lnI)
	}
	lnJ = logIncBetaCF(y, x, ly, lx, b, a)
	return log1mexp(lnJ), lnJ
}

// tTails returns ln P(T >= t) and ln P(T <= t) for t >= 0.
func tTails(t, df float64) (upper, lower float64) {
	if t == 0 {
		return -ln2, -ln2
	}
	if df > hugeDF {
		return NormLogSF(t), NormLogSF(-t)
	}
	if math.IsInf(t, 1) {
		return math.Inf(-1), 0
	}
	// x = ν/(ν+t²), 1-x = t²/(ν+t²), each formed directly.
	var x, y, lx, ly float64
	if t < 1e100 {
		t2 := t * t
		x, y = df/(df+t2), t2/(df+t2)
		lx, ly = -math.Log1p(t2/df), -math.Log1p(df/t2)
	} else {
		// t² would overflow: ln x = ln ν - 2 ln t - ln(1 + ν/t²).
		lt := math.Log(t)
		lx = math.Log(df) - 2*lt - math.Log1p(math.Exp(math.Log(df)-2*lt))
		x, y = math.Exp(lx), 1
		ly = -math.Log1p(math.Exp(lx))
	}
	lnI, _ := logIncBeta(x, y, lx, ly, df/2, 0.5)
	upper = lnI - ln2
	return upper, log1mexp(upper)
}

// TLogSF returns ln P(T >= t) for Student's t with df degrees of freedom (df > 0). Above
// df = 1e9 (and for +Inf) the normal tail is returned, which is then the more accurate of the
// two (see hugeDF). Invalid df or NaN t give NaN.
func TLogSF(t, df float64) float64 {
	if math.IsNaN(t) || math.IsNaN(df) || !(df > 0) {
		return math.NaN()
	}
	if t >= 0 {
		u, _ := tTails(t, df)
		return u
	}
	_, l := tTails(-t, df)
	return l
}

// fTails returns ln P(F >= f) and ln P(F <= f).
func fTails(f, df1, df2 float64) (upper, lower float64) {
	if f <= 0 {
		return 0, math.Inf(-1)
	}
	if math.IsInf(f, 1) {
		return math.Inf(-1), 0
	}
	// x = ν₂/(ν₂+ν₁F), 1-x = ν₁F/(ν₂+ν₁F); P(F >= f) = I_x(ν₂/2, ν₁/2).
	n1f := df1 * f
	x := df2 / (df2 + n1f)
	y := n1f / (df2 + n1f)
	lx := -math.Log1p(n1f / df2)
	ly := -math.Log1p(df2 / n1f)
	return logIncBeta(x, y, lx, ly, df2/2, df1/2)
}

// validF reports whether f is a number and both df are positive and finite.
func validF(f, df1, df2 float64) bool {
	return !math.IsNaN(f) && df1 > 0 && df2 > 0 && !math.IsInf(df1, 1) && !math.IsInf(df2, 1)
}

// FLogSF returns ln P(F >= f) for the F distribution with (df1, df2) degrees of freedom,
// both positive and finite (NaN otherwise).
func FLogSF(f, df1, df2 float64) float64 {
	if !validF(f, df1, df2) {
		return math.NaN()
	}
	u, _ := fTails(f, df1, df2)
	return u
}

// TToZ converts t (df degrees of freedom) to the z with the same one-sided upper-tail p.
// It is signed: TToZ(-t) = -TToZ(t), so a p near 1 is never formed.
func TToZ(t, df float64) float64 {
	if math.IsNaN(t) || math.IsNaN(df) || !(df > 0) {
		return math.NaN()
	}
	if t < 0 {
		return -TToZ(-t, df)
	}
	u, _ := tTails(t, df)
	return ZFromLogSF(u)
}

// FToZ converts an F statistic to the z with the same upper-tail p. z is negative when
// p > ½; that side is computed from the lower tail directly.
func FToZ(f, df1, df2 float64) float64 {
	if !validF(f, df1, df2) {
		return math.NaN()
	}
	u, l := fTails(f, df1, df2)
	if u <= -ln2 {
		return ZFromLogSF(u)
	}
	return -ZFromLogSF(l)
}

// tLogPDF returns ln of the t density at t.
func tLogPDF(t, df float64) float64 {
	return -logBetaFn(df/2, 0.5) - 0.5*math.Log(df) - (df+1)/2*math.Log1p(t*t/df)
}

// fLogPDF returns ln of the F density at f > 0.
func fLogPDF(f, df1, df2 float64) float64 {
	return 0.5*df1*math.Log(df1/df2) + (0.5*df1-1)*math.Log(f) -
		0.5*(df1+df2)*math.Log1p(df1*f/df2) - logBetaFn(df1/2, df2/2)
}

// invertLogSF solves logSF(s) = logp for s in (lo, hi) where logSF is decreasing,
// logSF(lo) >= logp > logSF(hi), by Newton steps on the log tail (derivative
// -exp(logPDF - logSF)) safeguarded by bisection.
func invertLogSF(logp, lo, hi float64, logSF, logPDF func(float64) float64) float64 {
	s := 0.5 * (lo + hi)
	for i := 0; i < 400; i++ {
		ls := logSF(s)
		g := ls - logp
		if g > 0 {
			lo = s
		} else {
			hi = s
		}
		if g == 0 {
			return s
		}
		next := s
		d := -math.Exp(logPDF(s) - ls)
		if d < 0 && !math.IsInf(d, 0) {
			next = s - g/d
		}
		if !(next > lo && next < hi) {
			if lo > 0 && hi/lo > 4 {
				next = math.Sqrt(lo * hi)
			} else {
				next = 0.5 * (lo + hi)
			}
		}
		if math.Abs(next-s) <= 2e-16*math.Abs(next) || hi-lo <= 4e-16*math.Abs(hi) {
			return next
		}
		s = next
	}
	return s
}

// TFromLogSF returns t with ln P(T >= t) = logp (df degrees of freedom): the inverse of
// TLogSF. It is +Inf when t would exceed the largest double.
func TFromLogSF(logp, df float64) float64 {
	switch {
	case math.IsNaN(logp) || logp > 0 || math.IsNaN(df) || !(df > 0):
		return math.NaN()
	case logp == 0:
		return math.Inf(-1)
	case math.IsInf(logp, -1):
		return math.Inf(1)
	case math.IsInf(df, 1):
		return ZFromLogSF(logp)
	case logp == -ln2:
		return 0
	case logp > -ln2:
		return -TFromLogSF(log1mexp(logp), df)
	}
	// The t quantile lies above the normal one for the same upper-tail p < ½.
	lo := math.Max(ZFromLogSF(logp), 0)
	hi := math.Max(2*lo, 1)
	for TLogSF(hi, df) > logp {
		lo = hi
		hi *= 4
		if math.IsInf(hi, 1) {
			return math.Inf(1)
		}
	}
	return invertLogSF(logp, lo, hi,
		func(t float64) float64 { return TLogSF(t, df) },
		func(t float64) float64 { return tLogPDF(t, df) })
}

// FFromLogSF returns f with ln P(F >= f) = logp for (df1, df2) degrees of freedom: the
// inverse of FLogSF. It is +Inf when f would exceed the largest double.
func FFromLogSF(logp, df1, df2 float64) float64 {
	switch {
	case math.IsNaN(logp) || logp > 0 || !validF(0, df1, df2):
		return math.NaN()
	case logp == 0:
		return 0
	case math.IsInf(logp, -1):
		return math.Inf(1)
	}
	lo, hi := 0.0, 1.0
	for FLogSF(hi, df1, df2) > logp {
		lo = hi
		hi *= 4
		if math.IsInf(hi, 1) {
			return math.Inf(1)
		}
	}
	return invertLogSF(logp, lo, hi,
		func(f float64) float64 { return FLogSF(f, df1, df2) },
		func(f float64) float64 { return fLogPDF(f, df1, df2) })
}

// hugeDF is the df above which the t tail is taken as the normal one. For large ν the
// continued fraction works at x = ν/(ν+t²) ≈ 1 and loses about ν·1e-16 of relative
// accuracy in ln p (measured against mpmath: 1e-13 at ν = 1e4, 1e-12 at 1e5, 5e-10 at 1e8),
// while the normal differs from t by about 1/ν. The two errors cross near 1e9.
const hugeDF = 1e9

// maxCF caps the continued fraction; it converges in a few hundred terms over the range used.
const maxCF = 100000
