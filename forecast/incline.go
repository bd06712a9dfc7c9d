package forecast

import (
	"math"
	"time"

	"github.com/headroom-dev/headroom/state"
)

// Incline is the trend engine. It finds the current regime of a series
// with a changepoint scan, fits that regime with a robust straight line and
// turns the fit into a predictive distribution:
//
//   - Each resolution of the view gets its own noise variance, estimated
//     robustly from second differences of neighbouring buckets, so points
//     are weighted by how much they actually scatter, and serial
//     correlation of the noise is measured so that wandering noise is not
//     taken for changes or trends.
//   - The scan (regime.go) compares, for every split of the history, two
//     least-squares lines against one, with costs from running weighted sums
//     over values clipped against their neighbours, so each split costs O(1)
//     and an isolated spike cannot make a changepoint. It is repeated on the
//     part after the last split to reach the most recent significant change.
//     A change too recent to form a regime of MinSegment points is left out
//     of the fit and widens the bands instead, so the mean does not jump.
//   - The regime is fitted by Huber-weighted iteratively reweighted least
//     squares from a robust start (robust.go), so a spike bucket anywhere,
//     the newest included, barely moves level or slope.
//   - A regime that follows a changepoint has its slope shrunk toward a
//     prior (the previous regime's slope when that regime was long, zero
//     otherwise), strongly while the regime is short: a fresh level after a
//     clean-up does not extrapolate a wild slope.
//
// The zero value is ready to use; zero fields take their defaults. Cost is
// O(number of composite points) per Fit.
type Incline struct {
	// MinSegment is the fewest composite points that form a regime; at
	// least 3, default 6.
	MinSegment int
	// Penalty multiplies log(n) in the changepoint criterion: a split must
	// improve n·log(RSS) by more than Penalty·log(n). Default 4.
	Penalty float64
	// Huber is the tuning constant of the robust fit in robust standard
	// deviations. Default 1.345 (95 % efficiency under normal noise).
	Huber float64
	// SlopeSpan sets how far a new regime's slope may stray, a priori, from
	// the prior slope: about one observation standard deviation per
	// SlopeSpan. Longer means stronger shrinkage; with one-minute buckets a
	// new slope is believed about half after a third of SlopeSpan. Default
	// 6h.
	SlopeSpan time.Duration
	// PriorSpan is how long the previous regime must have lasted to lend
	// its slope as the prior for the next; shorter regimes lend zero.
	// Default 6h.
	PriorSpan time.Duration
	// Persist is the doubt, beyond the age of the current regime, that
	// its slope holds on: the standard deviation of the slope from then on
	// relative to the slope itself, squared. Default 4, which keeps a trend
	// from opening an incident on extrapolation beyond its age alone
	// (the probability then stays below 0.7); negative turns it
	// off.
	Persist float64
	// SlopeEvidence is how many squared standard errors a slope must stand
	// from zero to be extrapolated at half its size. Default 64; negative
	// turns the tempering off.
	SlopeEvidence float64
}

// minPoints is the fewest usable buckets Fit works with.
const minPoints = 5

// Name returns "incline".
func (Incline) Name() string { return "incline" }

// params returns e with defaults applied.
func (e Incline) params() Incline {
	if e.MinSegment <= 0 {
		e.MinSegment = 6
	}
	e.MinSegment = max(e.MinSegment, 3)
	if !(e.Penalty > 0) {
		e.Penalty = 4
	}
	if !(e.Huber > 0) {
		e.Huber = 1.345
	}
	if e.SlopeSpan <= 0 {
		e.SlopeSpan = 6 * time.Hour
	}
	if e.PriorSpan <= 0 {
		e.PriorSpan = 6 * time.Hour
	}
	switch {
	case e.Persist == 0 || math.IsNaN(e.Persist):
		e.Persist = 4
	case e.Persist < 0:
		e.Persist = 0
	}
	switch {
	case e.SlopeEvidence == 0 || math.IsNaN(e.SlopeEvidence):
		e.SlopeEvidence = 64
	case e.SlopeEvidence < 0:
		e.SlopeEvidence = 0
	}
	return e
}

// Fit fills f from v; see Engine. It returns false, leaving f zeroed, when v
// has fewer than five usable buckets or yields no finite fit. A nil sc is
// allowed but allocates.
func (e Incline) Fit(v *state.View, sc *Scratch, f *Forecast) bool {
	if f == nil {
		return false
	}
	*f = Forecast{}
	if v == nil {
		return false
	}
	if sc == nil {
		sc = NewScratch()
	}
	p := e.params()
	n := sc.load(v)
	if n < minPoints {
		return false
	}
	sc.standardize(n)
	sc.clip(n)
	reg := sc.regime(n, p.MinSegment, p.Penalty)
	fit := sc.huber(reg.lo, reg.hi, p.Huber, sc.grp[n-1])

	// Observation noise: a bucket of the newest resolution.
	sigma2 := fit.phiGroup * sc.vnew
	b, vb := fit.b, fit.varB
	inherited := false // the slope leans on the previous regime's
	if reg.prev >= 0 && vb > 0 {
		// Prior on the slope of a regime that follows a changepoint.
		mu := -sc.trend // a real slope of zero, in detrended units
		tau0 := math.Sqrt(sigma2) / p.SlopeSpan.Hours()
		tau2 := tau0 * tau0
		if pb, pv, span, ok := sc.lineLS(reg.prev, reg.lo); ok && span >= p.PriorSpan.Hours() {
			mu = pb
			tau2 += pv
			inherited = true
		}
		if tau2 > 0 {
			post := 1 / (1/vb + 1/tau2)
			b = post * (b/vb + mu/tau2)
			vb = post
		}
	}
	level := fit.ym - b*fit.xm // at x = 0, the origin
	// Extrapolate a slope only as far as the evidence for it goes: one
	// that is t standard errors from zero is multiplied by
	// t²/(t²+SlopeEvidence). The level at the origin stays where the fit
	// put it; only the extrapolation is tempered. Wandering metrics have
	// local slopes that rarely last a day, a filling volume's slope stands
	// hundreds of standard errors clear. A slope that carries on from a
	// long previous regime has that regime's evidence behind it already.
	if k := p.SlopeEvidence; vb > 0 && !inherited {
		B := b + sc.trend
		B2 := B * B
		b = B*B2/(B2+k*vb) - sc.trend
	}
	varLevel := fit.phiPar/fit.sumW + fit.xm*fit.xm*vb
	cov := -fit.xm * vb

	// Transition: the newest points that all sit far on one side of the
	// line may be the start of a new level. Until MinSegment of them make a
	// regime the mean stays put, and the bands take the second moment of a
	// mixture that has moved there with probability run/MinSegment.
	run, delta := sc.trailingRun(reg.lo, n, level, b, math.Sqrt(fit.phiGroup))
	trans := 0.0
	if run > 0 {
		trans = min(float64(run)/float64(p.MinSegment), 1) * delta * delta
	}

	s, hr := sc.scale, 1/3600.0
	*f = Forecast{
		Engine:        p.Name(),
		Origin:        v.End,
		Level:         sc.ref + s*level,
		Slope:         s * (b + sc.trend) * hr,
		Since:         v.End + int64(math.Round((sc.x[reg.lo]-sc.width[sc.grp[reg.lo]]/2)*3600e3)),
		Support:       reg.hi - reg.lo,
		Sigma:         s * math.Sqrt(sigma2),
		VarLevel:      s * s * varLevel,
		CovLevelSlope: s * s * cov * hr,
		VarSlope:      s * s * vb * hr * hr,
		Transition:    s * s * trans,
		ScaleLower:    1,
		ScaleUpper:    1,
	}
	f.TailLower, f.TailUpper = sc.tails(reg.lo, reg.hi, fit)
	// A trend is believed about as far ahead as it has been seen.
	f.Age = float64(f.Origin-f.Since) / 1000
	f.Persist = p.Persist * f.Slope * f.Slope
	if !f.finite() {
		*f = Forecast{}
		return false
	}
	return true
}

// finite reports whether every number of f is finite and every variance
// non-negative.
func (f *Forecast) finite() bool {
	for _, x := range [...]float64{f.Level, f.Slope, f.Sigma, f.VarLevel, f.CovLevelSlope, f.VarSlope, f.Transition, f.VarSeason, f.Diffusion, f.Autocorrelation, f.Age, f.Persist, f.TailLower, f.TailUpper} {
		if math.IsNaN(x) || math.IsInf(x, 0) {
			return false
		}
	}
	return f.Sigma >= 0 && f.VarLevel >= 0 && f.VarSlope >= 0 && f.Transition >= 0 &&
		f.VarSeason >= 0 && f.Diffusion >= 0
}
