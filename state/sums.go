package state

import "math"

// Sums holds the weighted sufficient statistics of a straight-line least
// squares fit. The x sums are taken about the origin X0, which Add
// subtracts and Fit adds back, so that data far from x = 0 (timestamps,
// say) keep their precision; the zero Sums has X0 = 0.
//
// Weights are analytic (inverse-variance up to a common factor): an
// observation of weight w is taken to have variance σ²/w. N counts the
// observations so that the residual variance has the right degrees of
// freedom whatever the scale of the weights; with unit weights N equals W.
// Sums filled in by hand may leave N zero, and Fit then takes N = W, which
// is right for unit or frequency weights.
type Sums struct {
	W, X, Y, XX, XY, YY float64 // Σw, Σwx, Σwy, Σwx², Σwxy, Σwy², x measured from X0
	N                   float64 // observations with w > 0
	X0                  float64 // origin of x in the sums
}

// Add adds the observation (x, y) with weight w. Observations with w ≤ 0
// or NaN weight are ignored.
func (s *Sums) Add(x, y, w float64) {
	if !(w > 0) {
		return
	}
	x -= s.X0
	wx, wy := w*x, w*y
	s.W += w
	s.X += wx
	s.Y += wy
	s.XX += wx * x
	s.XY += wx * y
	s.YY += wy * y
	s.N++
}

// Sub returns the sums of the observations in s but not in o, which must
// be a subset of s. If o has another origin it is moved to s's first.
func (s Sums) Sub(o Sums) Sums {
	if o.X0 != s.X0 {
		o = o.shift(s.X0)
	}
	return Sums{
		W: s.W - o.W, X: s.X - o.X, Y: s.Y - o.Y,
		XX: s.XX - o.XX, XY: s.XY - o.XY, YY: s.YY - o.YY,
		N: s.N - o.N, X0: s.X0,
	}
}

// shift re-expresses the sums about origin x0.
func (s Sums) shift(x0 float64) Sums {
	d := x0 - s.X0 // x - x0 = (x - X0) - d
	s.XX += -2*d*s.X + d*d*s.W
	s.XY -= d * s.Y
	s.X -= d * s.W
	s.X0 = x0
	return s
}

// Line is a fitted straight line y = Intercept + Slope·x with its
// goodness of fit and the standard errors of its coefficients.
type Line struct {
	Intercept, Slope float64
	RSS              float64 // weighted residual sum of squares Σw(y - ŷ)²
	R2               float64 // 1 - RSS/Σw(y - ȳ)²; 1 when y does not vary
	ResidualSD       float64 // sqrt(RSS/(N-2)): SD of an observation of unit weight
	SEIntercept      float64
	SESlope          float64
	N                float64 // observations
}

// Fit returns the weighted least squares line through the observations,
// with the intercept at x = 0 of the caller's coordinates. It reports false
// if there are fewer than two observations or the x values do not differ
// measurably: Sxx at most 1e-12 of XX, that is a spread below about a
// millionth of their distance from X0. With exactly two observations the
// line is exact and ResidualSD and the standard errors are +Inf: nothing is
// known about the noise.
//
// It works from centred moments (Sxx = XX - X²/W and so on) about X0.
func (s Sums) Fit() (Line, bool) {
	n := s.N
	if n == 0 {
		n = s.W
	}
	if !(s.W > 0) || n < 2 {
		return Line{}, false
	}
	xm, ym := s.X/s.W, s.Y/s.W
	sxx := s.XX - s.X*xm
	sxy := s.XY - s.X*ym
	syy := s.YY - s.Y*ym
	// Rounding leaves Sxx at a few ulps of XX when every x is the same.
	if !(sxx > 1e-12*s.XX) {
		return Line{}, false
	}
	b := sxy / sxx
	xbar := xm + s.X0 // mean x in the caller's coordinates
	l := Line{Slope: b, Intercept: ym - b*xbar, N: n}
	l.RSS = max(syy-b*sxy, 0)
	l.R2 = 1
	if syy > 0 {
		l.R2 = 1 - l.RSS/syy
	}
	if n <= 2 {
		l.ResidualSD, l.SEIntercept, l.SESlope = math.Inf(1), math.Inf(1), math.Inf(1)
		return l, true
	}
	v := l.RSS / (n - 2)
	l.ResidualSD = math.Sqrt(v)
	l.SESlope = math.Sqrt(v / sxx)
	l.SEIntercept = math.Sqrt(v * (1/s.W + xbar*xbar/sxx))
	return l, true
}
