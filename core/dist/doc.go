// Package dist computes upper-tail log probabilities of the standard normal, Student t and
// F distributions, the matching z scores, and the inverses used for thresholds, accurate far
// into the tails (ln p down to about -1e5, far below the smallest double).
//
// Method (winnow methods notes, section c.4):
//
//   - t and F tails come from the regularised incomplete beta function, evaluated in log space
//     by its standard continued fraction (modified Lentz). The continued fraction is used
//     directly when x < (a+1)/(a+b+2); otherwise the complement 1 - I_{1-x}(b, a) is formed
//     with log1p. Both x and 1-x are formed directly from the statistic, never by subtraction.
//   - The normal log tail uses math.Erfc for moderate z and the asymptotic (Mills ratio)
//     series for z >= 30.
//   - z from ln p is found by Newton's method on ln Φ̄(z) - ln p, started from
//     sqrt(2A - ln(4πA)), A = -ln p. math.Erfcinv is not used: it saturates near z = 8.3.
//   - Signed conversions use symmetry: a negative t gives the negative of the z of |t|, so a
//     p near 1 is never formed; for F with p > 1/2 the lower tail is computed directly.
//   - Inverses (statistic from ln p) use Newton's method on the monotone log tail, safeguarded
//     by bisection.
//
// The continued fraction of the incomplete beta is the classical one (see e.g. Abramowitz &
// Stegun 26.5.8); the Lentz evaluation follows Lentz (1976, Applied Optics) as modified by
// Thompson & Barnett (1986, J. Comput. Phys.).
package dist
