package forecast

import (
	"math"
	"time"

	"github.com/headroom-dev/headroom/state"
)

// Tide is the periodic engine: a seasonal profile on top of the trend of
// Incline. The forecast mean is level + slope·dt + the seasonal offset at
// dt.
//
// The profile is estimated on the uniform level the cycle lives on
// (hourly for daily and weekly cycles, fifteen minutes for cycles of a few
// hours) by the ratio-to-moving-average method of classical decomposition
// made robust: a centred moving average over exactly one period (2×P for
// an even period P) follows the trend and any level shift without taking
// up the cycle. The average is taken of the values winsorized against a
// first, plain one, so that spikes and bursts do not lift it, and is
// carried along a straight line over the half period at each end where
// its window does not fit, so that every cycle of the history counts. Each
// phase of the cycle is then the median, over the cycles seen, of the
// values less that average, and the phases are centred to sum to zero. A
// median over a week of daily cycles is not moved by one anomalous day. A
// second period that is a multiple of the first (a week of days) is folded
// into the same profile as a day-of-week offset: the median level of each
// day less the profile, detrended by a robust line over the days, then the
// median per day of the week, so that two weeks of history are enough;
// days start at the hour where the days of the week differ most.
//
// Where the next finer level shows a whole cycle (a day of fifteen-minute
// buckets under an hourly profile), the profile is refined to that level:
// each bucket keeps its level from the coarse profile and takes its shape
// within from the finer level, shrunk by its signal-to-noise ratio and
// bounded by the coarse neighbours (see refine). A step inside the hour or
// on it is then followed; a smooth cycle keeps the hourly profile.
//
// Level and slope come from Incline on the composite history less the
// profile, each bucket less the profile's mean over the bucket, so that a
// cycle on a trend forecasts both and a level shift is still followed.
// What the profile misses (a day of larger amplitude) swings within the
// cycle, so a new regime's slope is shrunk with a SlopeSpan of
// slopeCycles cycles unless Incline sets one. Sigma, the parameter
// variances and the transition are Incline's on the deseasonalized
// history; VarSeason is the variance of the profile, π/2·σ²/cycles for a
// median of cycles values of noise σ, plus that of the finer detail.
//
// A Tide with a zero Cycles detects cycles itself on every Fit; Choose
// passes on what it found. The zero value is ready to use.
type Tide struct {
	Cycles Cycles
	// Incline fits level and slope of the deseasonalized history.
	Incline Incline
	// MinCycles is the fewest whole cycles of history the profile rests
	// on; at least 2, default 2.
	MinCycles int
}

// slopeCycles is the SlopeSpan of Tide's Incline in cycles, unless set: a
// slope is believed about half after a cycle of evidence.
const slopeCycles = 3

// Name returns "tide".
func (Tide) Name() string { return "tide" }

// profile describes where a seasonal profile is estimated.
type profile struct {
	lv    *state.LevelView
	p, p2 int // periods in buckets of lv; p2 = 0 without a second
}

// plan picks the level for the profile of cycle c: the finer level for a
// cycle of hours that it holds MinCycles times, else the coarsest level. A
// second period is dropped when it is no multiple of the first or when
// the history does not cover it.
func (e Tide) plan(v *state.View, c Cycles, minCycles int) (profile, bool) {
	long, short := cycleLevels(v)
	for _, i := range [2]int{short, long} {
		if i < 0 {
			continue
		}
		lv := &v.Levels[i]
		w := time.Duration(lv.Width) * time.Millisecond
		if w <= 0 || c.Period%w != 0 || (i == short && (c.Period > shortMax || c.Period2 > 0)) {
			continue
		}
		y, _ := trimNaN(lv.Y)
		p := int(min(c.Period/w, math.MaxInt32))
		if p < 2 || len(y) < minCycles*p {
			continue
		}
		pr := profile{lv: lv, p: p}
		if c.Period2 > 0 && c.Period2%c.Period == 0 {
			if p2 := int(min(c.Period2/w, math.MaxInt32)); p2/p >= 2 && len(y) >= p2+p {
				pr.p2 = p2
			}
		}
		return pr, true
	}
	return profile{}, false
}

// Fit fills f from v; see Engine. It returns false, leaving f zeroed, when
// no cycle is known or detected, when the history holds too few cycles,
// or when Incline cannot fit the deseasonalized history. The Season of f
// lives in sc. A nil sc is allowed but allocates.
func (e Tide) Fit(v *state.View, sc *Scratch, f *Forecast) bool {
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
	c := e.Cycles
	if c.Period <= 0 {
		c = DetectCycles(v, sc)
		if c.Period <= 0 {
			return false
		}
	}
	minCycles := e.minCycles()
	pr, ok := e.plan(v, c, minCycles)
	if !ok {
		return false
	}
	cs := &sc.cyc
	varSeason, ok := cs.profile(pr, minCycles)
	if !ok {
		return false
	}
	// Positions are bucket centres of the level, counted from the epoch.
	width := pr.lv.Width
	if fine := finerLevel(v, pr.lv); fine != nil {
		if vs, ok := cs.refine(fine, pr.lv.Width, pr.p); ok {
			width = fine.Width
			varSeason += vs
		}
	}
	n := int64(len(cs.season))
	cycle := n * width
	at := ((v.End-width/2)%cycle + cycle) % cycle
	season := Forecast{Season: cs.season, SeasonStep: float64(width) / 1000, SeasonAt: float64(at) / float64(width)}

	// The composite less the profile.
	dv := &cs.view
	nv := min(len(v.T), len(v.Y), len(v.W))
	dv.End = v.End
	dv.T = append(dv.T[:0], v.T[:nv]...)
	dv.W = append(dv.W[:0], v.W[:nv]...)
	dv.N = append(dv.N[:0], v.N[:min(nv, len(v.N))]...)
	dv.Y = grow(dv.Y, nv)
	cs.integrate()
	for i := range nv {
		dv.Y[i] = v.Y[i] - cs.seasonMean(&season, v.T[i], v.W[i]*3600)
	}
	inc := e.Incline
	if inc.SlopeSpan <= 0 {
		// What the profile misses of a cycle (a day of larger amplitude,
		// a peak a little early) leaves the deseasonalized history
		// swinging within the cycle; a new regime's slope must hold over
		// a good part of a cycle before it is extrapolated.
		inc.SlopeSpan = max(6*time.Hour, slopeCycles*time.Duration(pr.p)*time.Duration(pr.lv.Width)*time.Millisecond)
	}
	if !inc.Fit(dv, sc, f) {
		return false
	}
	f.Engine = e.Name()
	f.Cycle = time.Duration(pr.p) * time.Duration(pr.lv.Width) * time.Millisecond
	if pr.p2 > 0 {
		f.Cycle2 = time.Duration(pr.p2) * time.Duration(pr.lv.Width) * time.Millisecond
	}
	f.Autocorrelation = c.ACF
	f.Season, f.SeasonStep, f.SeasonAt = season.Season, season.SeasonStep, season.SeasonAt
	f.VarSeason = varSeason
	if !f.finite() {
		*f = Forecast{}
		return false
	}
	return true
}

// fits reports whether the history is long enough for e to fit: a level
// holds MinCycles cycles of e.Cycles, and the composite has enough points.
func (e Tide) fits(v *state.View) bool {
	if min(len(v.T), len(v.Y), len(v.W)) < minPoints {
		return false
	}
	_, ok := e.plan(v, e.Cycles, e.minCycles())
	return ok
}

// minCycles is MinCycles with its default and floor applied.
func (e Tide) minCycles() int {
	if e.MinCycles <= 0 {
		return 2
	}
	return max(e.MinCycles, 2)
}

// integrate prepares cs.cum for seasonMean: the integral of the profile
// in cs.season, interpolated linearly around the cycle, from position 0
// to each position.
func (cs *cycleScratch) integrate() {
	s := cs.season
	n := len(s)
	cs.cum = grow(cs.cum, n+1)
	cs.cum[0] = 0
	for k := range n {
		cs.cum[k+1] = cs.cum[k] + (s[k]+s[(k+1)%n])/2
	}
}

// seasonMean is the mean seasonal offset of f (whose Season is cs.season,
// integrated by integrate) over a bucket centred dt seconds after the
// origin and width seconds wide. A bucket is a mean over its width: an
// hourly bucket less a fifteen-minute profile at its centre would keep
// the profile's swing within the hour, and a profile of an hour's cycle
// does not move an hourly bucket at all.
func (cs *cycleScratch) seasonMean(f *Forecast, dt, width float64) float64 {
	if !(width > 0) || !(f.SeasonStep > 0) || len(cs.season) == 0 {
		return f.Seasonal(dt)
	}
	a := f.SeasonAt + (dt-width/2)/f.SeasonStep
	b := f.SeasonAt + (dt+width/2)/f.SeasonStep
	if !(b-a > 1e-9) || math.IsInf(b-a, 0) {
		return f.Seasonal(dt)
	}
	return (cs.phi(b) - cs.phi(a)) / (b - a)
}

// phi is the integral of the interpolated profile from position 0 to x.
func (cs *cycleScratch) phi(x float64) float64 {
	s := cs.season
	n := len(s)
	c := math.Floor(x / float64(n))
	rem := x - c*float64(n)
	i := min(max(int(rem), 0), n-1)
	fr := rem - float64(i)
	a, b := s[i], s[(i+1)%n]
	return c*cs.cum[n] + cs.cum[i] + fr*a + fr*fr/2*(b-a)
}
