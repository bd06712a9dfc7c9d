package forecast

import (
	"fmt"
	"math"
)

// This file holds Holt–Winters exponential smoothing (Holt 1957, Winters
// 1960) as a reference method for the evaluation baselines. It follows the
// conventions of R's stats::HoltWinters and predict.HoltWinters (start
// values, the recursion's order of operations, the interval formula), so
// that its numbers can be checked against R's to the last digits.

// HoltWinters is a Holt–Winters exponential smoothing model. Period 0 is
// Holt's linear method (level and trend only).
type HoltWinters struct {
	Alpha, Beta, Gamma float64
	Period             int
	Multiplicative     bool
}

// HWStart are start values: level, trend and (Period > 0) Period seasonal
// indices, the one for the first step of the recursion first.
type HWStart struct {
	Level, Trend float64
	Season       []float64
}

// HWFit is the state after running a model over a series.
type HWFit struct {
	Model        HoltWinters
	Level, Trend float64
	// Season holds the last Period seasonal indices, oldest first, so
	// Season[(h-1)%Period] is used for step h.
	Season []float64
	SSE    float64 // of the one-step errors over the fitted range
	Sigma2 float64 // sample variance of the one-step errors (R's convention)
	N      int     // one-step errors counted
}

// start is the index of the first value the recursion forecasts: start
// values come from the first period, or for Holt's method from the first
// two values.
func (m HoltWinters) start() int {
	if m.Period > 0 {
		return m.Period
	}
	return 2
}

// Run runs the recursion of m from s over x and returns the state after
// the last value. As in R, the recursion starts after the values the start
// values come from: at x[Period], or at x[2] for Holt's method (Period 0);
// the one-step errors from there on make SSE and Sigma2. With a negative
// Period or a Season of the wrong length the result holds NaN. Parameters
// are used as given, also outside [0, 1].
func (m HoltWinters) Run(x []float64, s HWStart) HWFit {
	nan := math.NaN()
	f := HWFit{Model: m, Level: nan, Trend: nan, SSE: nan, Sigma2: nan}
	p := m.Period
	if p < 0 || (p > 0 && len(s.Season) != p) {
		return f
	}
	var ring []float64
	if p > 0 {
		ring = append(ring, s.Season...)
	}
	errs := make([]float64, 0, max(len(x)-m.start(), 0))
	r := m.recurse(x, s.Level, s.Trend, ring, &errs)
	f.Level, f.Trend, f.SSE, f.N = r.level, r.trend, r.sse, r.n
	if r.n >= 2 {
		// Two passes, as R's var: the mean, then the squared deviations.
		mean := 0.0
		for _, e := range errs {
			mean += e
		}
		mean /= float64(r.n)
		ss := 0.0
		for _, e := range errs {
			ss += (e - mean) * (e - mean)
		}
		f.Sigma2 = ss / float64(r.n-1)
	}
	if p > 0 {
		// Rotate the ring so that the index for step 1 comes first.
		f.Season = make([]float64, p)
		n := copy(f.Season, ring[r.next:])
		copy(f.Season[n:], ring[:r.next])
	}
	return f
}

// hwRun is the outcome of one pass of the recursion.
type hwRun struct {
	level, trend float64
	sse          float64
	n            int // one-step errors
	next         int // position in the seasonal ring of the next step's index
}

// recurse runs the recursion over x from level l and trend b. ring holds
// the Period seasonal indices, the one for the first step first; it is
// updated in place and wraps around. With errs not nil it appends the
// one-step errors there; without, it allocates nothing, for the
// optimiser's sake.
//
// The products are converted to float64 explicitly so that no platform
// fuses them into multiply-adds: R rounds each operation, and the
// reference checks compare to the last digits.
func (m HoltWinters) recurse(x []float64, l, b float64, ring []float64, errs *[]float64) hwRun {
	a, be, g := m.Alpha, m.Beta, m.Gamma
	p := len(ring)
	var r hwRun
	k := 0
	for i := m.start(); i < len(x); i++ {
		xi := x[i]
		xhat := l + b
		var st float64
		if p > 0 {
			st = ring[k]
			if m.Multiplicative {
				xhat *= st
			} else {
				xhat += st
			}
		}
		res := xi - xhat
		r.sse += float64(res * res)
		r.n++
		if errs != nil {
			*errs = append(*errs, res)
		}

		var nl float64
		switch {
		case p > 0 && m.Multiplicative:
			nl = float64(a*(xi/st)) + float64((1-a)*(l+b))
		default:
			// For Holt's method st is 0, and xi−0 is xi.
			nl = float64(a*(xi-st)) + float64((1-a)*(l+b))
		}
		b = float64(be*(nl-l)) + float64((1-be)*b)
		l = nl
		if p > 0 {
			if m.Multiplicative {
				ring[k] = float64(g*(xi/l)) + float64((1-g)*st)
			} else {
				ring[k] = float64(g*(xi-l)) + float64((1-g)*st)
			}
			if k++; k == p {
				k = 0
			}
		}
	}
	r.level, r.trend, r.next = l, b, k
	return r
}

// Forecast is the forecast h ≥ 1 steps after the end of the series: level
// plus h trends, plus (additive) or times (multiplicative) the seasonal
// index of that step. NaN for h < 1 or a fit without the state it needs.
func (f *HWFit) Forecast(h int) float64 {
	if f == nil || h < 1 {
		return math.NaN()
	}
	fc := f.Level + float64(float64(h)*f.Trend)
	p := f.Model.Period
	if p <= 0 {
		return fc
	}
	if len(f.Season) != p {
		return math.NaN()
	}
	s := f.Season[(h-1)%p]
	if f.Model.Multiplicative {
		return fc * s
	}
	return fc + s
}

// Interval is the two-sided prediction interval at the given level (0.95
// for 95 %) h ≥ 1 steps ahead for the additive model and Holt's method, as
// R's predict.HoltWinters computes it: the forecast ± z·se with
// se² = Sigma2·(1 + Σ_{j=1}^{h−1} ψ_j²), ψ_j = α(1 + jβ) + γ(1 − α) when j is
// a multiple of the period. Multiplicative models are not covered (R uses
// a different variance there) and get NaN, as do h < 1, a level outside
// (0, 1) and a fit with fewer than two one-step errors.
func (f *HWFit) Interval(h int, level float64) (lo, hi float64) {
	nan := math.NaN()
	if f == nil || h < 1 || !(level > 0 && level < 1) || (f.Model.Multiplicative && f.Model.Period > 0) {
		return nan, nan
	}
	se := f.se(h)
	fc := f.Forecast(h)
	z := normQuantile((1 + level) / 2)
	return fc - z*se, fc + z*se
}

// se is the standard error of the additive forecast h steps ahead.
func (f *HWFit) se(h int) float64 {
	m := f.Model
	sum := 1.0
	for j := 1; j < h; j++ {
		psi := m.Alpha * (1 + float64(j)*m.Beta)
		if m.Period > 0 && j%m.Period == 0 {
			psi += m.Gamma * (1 - m.Alpha)
		}
		sum += psi * psi
	}
	return math.Sqrt(f.Sigma2 * sum)
}

// StartR returns the start values R's stats::HoltWinters derives from x.
// For Holt's method (period 0) they are the second value and the first
// difference. For a seasonal model they come from a classical
// decomposition of the first two periods: a centred moving average over one
// period (weights ½, 1, …, 1, ½ for an even period) gives the trend, the
// seasonal indices are the mean deviation (or ratio) from it at each
// position, centred on 0 (or 1), and level and trend are the intercept and
// slope of a least-squares line through the moving averages against
// 1, 2, …, as R fits them. It needs two values (Holt) or two periods.
func StartR(x []float64, period int, multiplicative bool) (HWStart, error) {
	if err := hwCheck(x, period, multiplicative); err != nil {
		return HWStart{}, err
	}
	if period == 0 {
		if len(x) < 2 {
			return HWStart{}, fmt.Errorf("forecast: holt-winters: %d values, want at least 2 for start values", len(x))
		}
		return HWStart{Level: x[1], Trend: x[1] - x[0]}, nil
	}
	n := 2 * period
	if len(x) < n {
		return HWStart{}, fmt.Errorf("forecast: holt-winters: %d values, want at least two periods (%d)", len(x), n)
	}
	trend := hwMovingAverage(x[:n], period)
	// Seasonal figure: the mean deviation (or ratio) at each position over
	// the periods where the moving average exists.
	season := make([]float64, period)
	dev := make([]float64, 0, 2)
	for i := range season {
		dev = dev[:0]
		for t := i; t < n; t += period {
			switch {
			case math.IsNaN(trend[t]):
			case multiplicative:
				dev = append(dev, x[t]/trend[t])
			default:
				dev = append(dev, x[t]-trend[t])
			}
		}
		season[i] = hwMeanR(dev)
	}
	c := hwMeanR(season)
	for i := range season {
		if multiplicative {
			season[i] /= c
		} else {
			season[i] -= c
		}
	}
	// Least-squares line through the moving averages against 1, 2, ….
	var dat []float64
	for _, v := range trend {
		if !math.IsNaN(v) {
			dat = append(dat, v)
		}
	}
	tm := float64(len(dat)+1) / 2
	ym := hwMeanR(dat)
	var sxy, sxx float64
	for i, v := range dat {
		dt := float64(i+1) - tm
		sxy += dt * (v - ym)
		sxx += dt * dt
	}
	b := sxy / sxx
	return HWStart{Level: ym - b*tm, Trend: b, Season: season}, nil
}

// hwMovingAverage is the centred moving average over one period that R's
// decompose uses: equal weights 1/p over p values for an odd period, and
// ½/p, 1/p, …, 1/p, ½/p over p+1 values for an even one. It is NaN where the
// window does not fit. The sum runs from the newest value of the window to
// the oldest, as R's filter does.
func hwMovingAverage(x []float64, p int) []float64 {
	nf := p
	if p%2 == 0 {
		nf = p + 1
	}
	w := make([]float64, nf)
	for j := range w {
		w[j] = 1 / float64(p)
	}
	if p%2 == 0 {
		w[0], w[nf-1] = 0.5/float64(p), 0.5/float64(p)
	}
	shift := nf / 2
	out := make([]float64, len(x))
	for i := range out {
		if i+shift-(nf-1) < 0 || i+shift >= len(x) {
			out[i] = math.NaN()
			continue
		}
		z := 0.0
		for j, wj := range w {
			z += float64(wj * x[i+shift-j])
		}
		out[i] = z
	}
	return out
}

// hwMeanR is the mean as R's mean computes it: the sum over n, refined by
// the mean of the deviations from it, which recovers most of what the
// first sum lost to rounding.
func hwMeanR(a []float64) float64 {
	if len(a) == 0 {
		return math.NaN()
	}
	s := 0.0
	for _, v := range a {
		s += v
	}
	s /= float64(len(a))
	t := 0.0
	for _, v := range a {
		t += v - s
	}
	return s + t/float64(len(a))
}

// hwCheck validates the arguments shared by StartR and FitHoltWinters.
func hwCheck(x []float64, period int, multiplicative bool) error {
	switch {
	case period < 0 || period == 1:
		return fmt.Errorf("forecast: holt-winters: period %d, want 0 (no season) or at least 2", period)
	case multiplicative && period == 0:
		return fmt.Errorf("forecast: holt-winters: a multiplicative model needs a period")
	}
	for i, v := range x {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return fmt.Errorf("forecast: holt-winters: value %d is %v", i, v)
		}
		if multiplicative && !(v > 0) {
			return fmt.Errorf("forecast: holt-winters: value %d is %v, a multiplicative model needs positive values", i, v)
		}
	}
	return nil
}

// FitHoltWinters fits a Holt–Winters model to x: start values from StartR,
// then alpha, beta and (period > 0) gamma in [0, 1] minimising the sum of
// squared one-step errors, found by a bounded Nelder–Mead search from
// alpha 0.3, beta 0.1, gamma 0.1 (R's starting point). Period 0 is Holt's
// method. It needs three values (Holt) or two periods, all finite, and
// positive for a multiplicative model.
func FitHoltWinters(x []float64, period int, multiplicative bool) (HWFit, error) {
	s, err := StartR(x, period, multiplicative)
	if err != nil {
		return HWFit{}, err
	}
	m := HoltWinters{Period: period, Multiplicative: multiplicative}
	if len(x) <= m.start() {
		return HWFit{}, fmt.Errorf("forecast: holt-winters: %d values, want at least %d", len(x), m.start()+1)
	}
	x0, lo, hi := []float64{0.3, 0.1, 0.1}, []float64{0, 0, 0}, []float64{1, 1, 1}
	if period == 0 {
		x0, lo, hi = x0[:2], lo[:2], hi[:2]
	}
	ring := make([]float64, period)
	sse := func(q []float64) float64 {
		m.Alpha, m.Beta = q[0], q[1]
		if period > 0 {
			m.Gamma = q[2]
		}
		copy(ring, s.Season)
		return m.recurse(x, s.Level, s.Trend, ring, nil).sse
	}
	q, v, _ := nelderMead(sse, x0, lo, hi, nmConfig{})
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return HWFit{}, fmt.Errorf("forecast: holt-winters: no parameters give a finite error")
	}
	m.Alpha, m.Beta = q[0], q[1]
	if period > 0 {
		m.Gamma = q[2]
	}
	return m.Run(x, s), nil
}
