package forecast

// This file holds the types engines, projections and rules share.

import (
	"math"
	"time"

	"github.com/headroom-dev/headroom/state"
)

// Engine fits a forecast to a history. Implementations are safe for
// concurrent use; per-call scratch lives in the Scratch passed in.
type Engine interface {
	Name() string
	// Fit fills f from v. It returns false when the history is too short or
	// too sparse to say anything.
	Fit(v *state.View, sc *Scratch, f *Forecast) bool
}

// Forecast is a fitted predictive distribution for one series, relative to
// the view's End (the origin). Times are seconds after the origin.
type Forecast struct {
	Engine string
	Origin int64   // unix ms
	Level  float64 // fitted mean at the origin
	Slope  float64 // per second
	Since  int64   // unix ms: start of the current regime
	// Cycle is the period of the seasonal component, 0 without one;
	// Cycle2 a second, longer period folded into the same component (a
	// weekly pattern on top of a daily one), 0 without one.
	Cycle, Cycle2 time.Duration
	// Autocorrelation of the detrended history at the lag of Cycle: the
	// evidence for the cycle; 0 without one.
	Autocorrelation float64
	// Season is the seasonal component of periodic engines: offsets added
	// to the straight-line mean, Season[k] at phase position k, positions
	// SeasonStep seconds apart and wrapping around after len(Season). The
	// origin sits at the fractional position SeasonAt; between positions
	// the offset is interpolated linearly. Nil without a cycle. The slice
	// may belong to the Scratch of the Fit that made it and is then valid
	// until that Scratch is used again.
	Season     []float64
	SeasonStep float64 // seconds
	SeasonAt   float64
	// Variance of the estimated seasonal offsets, added to every forecast
	// step's variance.
	VarSeason float64
	Support   int     // composite points the fit rests on
	Sigma     float64 // residual standard deviation of one observation
	// Parameter uncertainty of the level and slope (variance, covariance),
	// already scaled by Sigma².
	VarLevel, CovLevelSlope, VarSlope float64
	// Extra variance while the series is in transition between regimes.
	Transition float64
	// Diffusion is variance per second of horizon from a level that
	// wanders (a random-walk part of the noise): it adds Diffusion·dt.
	Diffusion float64
	// A trend seen for Age seconds is not taken to last much longer
	// unseen: beyond Age the variance grows by Persist·(dt − Age)², the
	// doubt whether the slope holds on. Persist 0 turns this off.
	Age, Persist float64
	// Band calibration. ScaleLower and ScaleUpper scale the lower and
	// upper half of the 80 % band, relative to the normal band, at
	// horizons up to NearAt seconds; FarLower and FarUpper at FarAt and
	// beyond; in between the scale moves linearly in log time. FarAt 0
	// means the near scales hold at every horizon. TailLower and
	// TailUpper are the ratio of the 95 % band's scale to the 80 % band's
	// on each side: the weight of the tails. Quantiles between the two
	// levels interpolate; beyond, they keep the nearer. A scale or tail
	// that is not positive counts as 1.
	ScaleLower, ScaleUpper float64
	FarLower, FarUpper     float64
	NearAt, FarAt          float64
	TailLower, TailUpper   float64
}

// Mean is the forecast mean dt seconds after the origin.
func (f *Forecast) Mean(dt float64) float64 {
	m := f.Level + f.Slope*dt
	if len(f.Season) > 0 {
		m += f.Seasonal(dt)
	}
	return m
}

// Seasonal is the seasonal offset dt seconds after the origin, 0 without a
// cycle.
func (f *Forecast) Seasonal(dt float64) float64 {
	n := len(f.Season)
	if n == 0 || !(f.SeasonStep > 0) {
		return 0
	}
	// Floor rather than math.Mod: this runs for every step of a scan.
	nf := float64(n)
	p := f.SeasonAt + dt/f.SeasonStep
	p -= math.Floor(p/nf) * nf
	if !(p >= 0 && p < nf) {
		if p == nf {
			p = 0
		} else {
			return 0 // NaN or ±Inf
		}
	}
	i := int(p)
	fr := p - float64(i)
	i %= n
	return f.Season[i]*(1-fr) + f.Season[(i+1)%n]*fr
}

// Periodic reports whether the forecast has a seasonal component.
func (f *Forecast) Periodic() bool { return len(f.Season) > 0 && f.SeasonStep > 0 }

// Point is one forecast step.
type Point struct {
	T                int64 // unix ms
	Mean             float64
	Lower80, Upper80 float64
	Lower95, Upper95 float64
}

// Direction says on which side of a threshold a breach lies.
type Direction int8

// Directions.
const (
	Above Direction = 1
	Below Direction = -1
)

// Rule is one projected-breach rule.
type Rule struct {
	Name      string
	Match     Matcher       // which series; the zero Matcher matches all
	Threshold float64       //
	Direction Direction     //
	Horizon   time.Duration // how far ahead a breach counts
	// Probability at or above which the projection holds (default 0.8), and
	// below which an open incident starts to resolve (default 0.5).
	OpenAt, CloseAt float64
	// How long the projection must hold before an incident opens, and how
	// long it must fail before the incident resolves (event time).
	Confirm, Release time.Duration
	// Warmup is how much history a series needs before an incident opens
	// on it: until a daily cycle has been seen to repeat, its rising half
	// looks like a trend, and cycle detection is sure of a daily cycle
	// only after three of them and a few hours to settle. Default 96h;
	// negative means none.
	Warmup time.Duration
	Engine string // engine override; empty chooses automatically
}

// Projection is the breach outlook of one forecast under one rule.
type Projection struct {
	Probability float64 // of crossing within the horizon
	ETA         int64   // unix ms when the mean crosses; 0 if it does not within the search span
	Early, Late int64   // unix ms when the upper / lower 80 % band crosses (for Above; swapped for Below); 0 if none
}

// EventState is the lifecycle step an event reports.
type EventState string

// Lifecycle states published on breach events.
const (
	Opened   EventState = "opened"
	Updated  EventState = "updated"
	Resolved EventState = "resolved"
)
