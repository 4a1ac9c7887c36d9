package budget

import (
	"fmt"
	"math"
	"sync"
)

// The Gaussian copula behind Draw. Every source is a function of one or two
// independent-looking normal scores ("latent" here): a source of one distribution
// maps its score z through Φ to its own quantile function; a drift has two (its
// coefficient and the temperature), a ratio two (r1 and r2), a fixed open-loop
// gain none. Correlated sources have correlated scores, drawn as L·w with w
// independent standard normals and L the Cholesky factor of the scores'
// correlation matrix.
//
// The file states the correlation of the sources' values (JCGM 100 §5.2.2), which
// for two non-normal marginals is not the correlation of their scores (two
// rectangular values whose scores correlate 0.9 correlate 6/π·asin(0.45) =
// 0.893). The score correlation is therefore solved for so that the values
// correlate as stated: with g₁, g₂ the standardised values as functions of the
// score and b_k their coefficients on the normalised Hermite polynomials,
// corr(g₁(z₁), g₂(z₂)) = Σ_k b₁ₖ·b₂ₖ·ρᵏ (Mehler's formula), increasing in ρ.

// hermiteTerms is how many Hermite coefficients the conversion keeps; for the
// budget's marginals the tail beyond is below 1e-4 of the variance.
const hermiteTerms = 40

type latentModel struct {
	n     int         // normal scores per unit
	first []int       // the first score of each source; -1 for none
	chol  [][]float64 // lower-triangular factor of the scores' correlation; nil: independent
}

// scores returns how many normal scores source s takes.
func scores(s *Source) int {
	switch s.Dist.Kind {
	case KindDrift, KindRatio:
		return 2
	case KindOpenLoop:
		if s.OpenLoop == nil || s.OpenLoop.High == s.OpenLoop.Low {
			return 0
		}
	}
	return 1
}

// correlationError is a correlation that cannot be honoured: Index is the
// correlation's position in the file (−1 for the matrix as a whole).
type correlationError struct {
	Index int
	Msg   string
}

func (e *correlationError) Error() string { return e.Msg }

// newLatent lays out the scores of b's sources and factors their correlation.
func newLatent(b *Budget) (latentModel, error) {
	lm := latentModel{first: make([]int, len(b.Sources))}
	for i := range b.Sources {
		k := scores(&b.Sources[i])
		lm.first[i] = -1
		if k > 0 {
			lm.first[i] = lm.n
		}
		lm.n += k
	}
	if len(b.Correlations) == 0 && !anyRatioCorrelation(b) {
		return lm, nil
	}
	// The stated correlations of the values must themselves be consistent.
	stated := identity(len(b.Sources))
	for _, c := range b.Correlations {
		stated[c.A][c.B], stated[c.B][c.A] = c.Coefficient, c.Coefficient
	}
	if _, ok := cholesky(stated); !ok {
		return lm, &correlationError{-1, "the correlations between sources are inconsistent: their matrix is not positive semi-definite (no set of sources can correlate so)"}
	}
	r := identity(lm.n)
	for i := range b.Sources {
		s := &b.Sources[i]
		if s.Ratio != nil && s.Ratio.Correlation != 0 {
			j := lm.first[i]
			rho := scoreCorrelation(rectCoefs(), rectCoefs(), s.Ratio.Correlation)
			r[j][j+1], r[j+1][j] = rho, rho
		}
	}
	coefs := map[int][]float64{}
	coefsAt := func(i int) []float64 {
		if c, ok := coefs[i]; ok {
			return c
		}
		c := coefsOf(&b.Sources[i])
		coefs[i] = c
		return c
	}
	for k, c := range b.Correlations {
		sa, sb := &b.Sources[c.A], &b.Sources[c.B]
		if sa.Dist.Sigma == 0 || sb.Dist.Sigma == 0 {
			continue // a source of no spread correlates with nothing
		}
		ca, cb := coefsAt(c.A), coefsAt(c.B)
		lo, hi := valueCorrelation(ca, cb, -1), valueCorrelation(ca, cb, 1)
		if c.Coefficient < lo-1e-6 || c.Coefficient > hi+1e-6 {
			return lm, &correlationError{k, fmt.Sprintf("a %s and a %s source can correlate from %.4g to %.4g, not %g",
				sa.Dist.Kind, sb.Dist.Kind, lo, hi, c.Coefficient)}
		}
		rho := scoreCorrelation(ca, cb, c.Coefficient)
		i, j := lm.first[c.A], lm.first[c.B]
		r[i][j], r[j][i] = rho, rho
	}
	l, ok := cholesky(r)
	if !ok {
		return lm, &correlationError{-1, "the correlations between sources cannot be drawn together: the correlation matrix of their normal scores is not positive semi-definite"}
	}
	lm.chol = l
	return lm, nil
}

func anyRatioCorrelation(b *Budget) bool {
	for _, s := range b.Sources {
		if s.Ratio != nil && s.Ratio.Correlation != 0 {
			return true
		}
	}
	return false
}

func identity(n int) [][]float64 {
	m := make([][]float64, n)
	for i := range m {
		m[i] = make([]float64, n)
		m[i][i] = 1
	}
	return m
}

// cholesky factors the symmetric matrix a as L·Lᵀ, allowing it to be singular
// (a correlation of ±1); ok is false when a is not positive semi-definite.
func cholesky(a [][]float64) ([][]float64, bool) {
	n := len(a)
	l := make([][]float64, n)
	for i := range l {
		l[i] = make([]float64, n)
	}
	for j := range n {
		d := a[j][j]
		for k := range j {
			d -= l[j][k] * l[j][k]
		}
		if d < -1e-9 {
			return nil, false
		}
		if d < 1e-12 {
			// A zero pivot: column j depends on the earlier ones, which must then
			// give every later entry of it too.
			for i := j + 1; i < n; i++ {
				s := a[i][j]
				for k := range j {
					s -= l[i][k] * l[j][k]
				}
				if math.Abs(s) > 1e-6 {
					return nil, false
				}
			}
			continue
		}
		l[j][j] = math.Sqrt(d)
		for i := j + 1; i < n; i++ {
			s := a[i][j]
			for k := range j {
				s -= l[i][k] * l[j][k]
			}
			l[i][j] = s / l[j][j]
		}
	}
	return l, true
}

// phi is the standard normal distribution function Φ.
func phi(z float64) float64 { return 0.5 * math.Erfc(-z/math.Sqrt2) }

// quantile is a distribution's value at normal score z: F⁻¹(Φ(z)), computed
// without losing the tails (erf and erfc in place of Φ).
func quantile(d Dist, z float64) float64 {
	a := d.HalfWidth
	switch d.Kind {
	case KindNormal:
		return d.Mean + d.Sigma*z
	case KindUniform:
		return d.Mean + a*math.Erf(z/math.Sqrt2)
	case KindTriangular:
		if z < 0 {
			return d.Mean - a + a*math.Sqrt(math.Erfc(-z/math.Sqrt2))
		}
		return d.Mean + a - a*math.Sqrt(math.Erfc(z/math.Sqrt2))
	case KindArcsine:
		return d.Mean + a*math.Sin(math.Pi/2*math.Erf(z/math.Sqrt2))
	}
	return d.Mean
}

// valueAt is the value of source s at its scores z (len scores(s)).
func valueAt(s *Source, z []float64) float64 {
	switch s.Dist.Kind {
	case KindDrift:
		d := s.Drift
		c := d.Coefficient * math.Erf(z[0]/math.Sqrt2)
		t := d.Temp.Low + (d.Temp.High-d.Temp.Low)*phi(z[1])
		return c * (t - d.Temp.Reference)
	case KindRatio:
		r := s.Ratio
		return r.gain(r.R1.Tolerance*math.Erf(z[0]/math.Sqrt2), r.R2.Tolerance*math.Erf(z[1]/math.Sqrt2))
	case KindOpenLoop:
		if s.OpenLoop == nil {
			return s.Dist.Mean
		}
		return -1 / (1 + s.OpenLoop.gainAt(zOr0(z))*s.OpenLoop.Beta)
	}
	return quantile(s.Dist, z[0])
}

func zOr0(z []float64) float64 {
	if len(z) == 0 {
		return 0
	}
	return z[0]
}

// The quadrature over one normal score: Simpson's rule on [−zMax, zMax].
const (
	zMax   = 10.0
	zSteps = 4000 // even
)

// integrate returns E[f(z)] for z standard normal.
func integrate(f func(z float64) float64) float64 {
	h := 2 * zMax / zSteps
	var s float64
	for i := 0; i <= zSteps; i++ {
		z := -zMax + float64(i)*h
		w := 2.0
		switch {
		case i == 0 || i == zSteps:
			w = 1
		case i%2 == 1:
			w = 4
		}
		s += w * f(z) * math.Exp(-z*z/2)
	}
	return s * h / 3 / math.Sqrt(2*math.Pi)
}

// momentsOf returns the mean and standard deviation of f(z), z standard normal.
func momentsOf(f func(z float64) float64) (mean, sd float64) {
	mean = integrate(f)
	v := integrate(func(z float64) float64 { d := f(z) - mean; return d * d })
	return mean, math.Sqrt(v)
}

// hermite returns the coefficients b_1 … b_K of the standardised g on the
// normalised Hermite polynomials h_k = He_k/√k!, h_{k+1} = (z·h_k − √k·h_{k−1})/√(k+1),
// all in one pass of the quadrature.
func hermite(g func(z float64) float64) []float64 {
	b := make([]float64, hermiteTerms+1)
	h := 2 * zMax / zSteps
	for i := 0; i <= zSteps; i++ {
		z := -zMax + float64(i)*h
		w := 2.0
		switch {
		case i == 0 || i == zSteps:
			w = 1
		case i%2 == 1:
			w = 4
		}
		f := w * g(z) * math.Exp(-z*z/2)
		h0, h1 := 1.0, z
		for k := 1; k <= hermiteTerms; k++ {
			b[k] += f * h1
			h0, h1 = h1, (z*h1-math.Sqrt(float64(k))*h0)/math.Sqrt(float64(k+1))
		}
	}
	for k := range b {
		b[k] *= h / 3 / math.Sqrt(2*math.Pi)
	}
	return b
}

// rectCoefs are the coefficients of a rectangular value (the ratio's resistors).
var rectCoefs = sync.OnceValue(func() []float64 {
	return coefsOf(&Source{Dist: Dist{Kind: KindUniform, HalfWidth: 1, Sigma: 1 / math.Sqrt(3)}})
})

// coefsOf returns the Hermite coefficients of source s's standardised value
// (one score).
func coefsOf(s *Source) []float64 {
	m, sd := s.Dist.Mean, s.Dist.Sigma
	if s.Dist.Kind == KindOpenLoop {
		m, sd = momentsOf(func(z float64) float64 { return valueAt(s, []float64{z}) })
	}
	return hermite(func(z float64) float64 { return (valueAt(s, []float64{z}) - m) / sd })
}

// valueCorrelation is the correlation of two values whose scores correlate rho.
func valueCorrelation(a, b []float64, rho float64) float64 {
	var s, na, nb float64
	p := 1.0
	for k := 1; k < len(a); k++ {
		p *= rho
		s += a[k] * b[k] * p
		na += a[k] * a[k]
		nb += b[k] * b[k]
	}
	return s / math.Sqrt(na*nb)
}

// scoreCorrelation solves valueCorrelation(a, b, ρ) = want for ρ in [−1, 1].
func scoreCorrelation(a, b []float64, want float64) float64 {
	lo, hi := -1.0, 1.0
	for range 80 {
		mid := (lo + hi) / 2
		if valueCorrelation(a, b, mid) < want {
			lo = mid
		} else {
			hi = mid
		}
	}
	return (lo + hi) / 2
}
