package forecast

import (
	"math"
	"time"

	"github.com/headroom-dev/headroom/state"
)

// Calibration keeps the bands of one series honest online, after adaptive
// conformal inference (Gibbs & Candès, 2021): every so often a forecast is
// set aside as a check; when its time comes, the value that arrived is
// compared with each side of its bands, and the scale of that side moves
// up after a miss and down after a hit, in proportions that settle where
// misses happen at the nominal rate: 10 % on each side of the 80 % band,
// 2.5 % of the 95 % band. Each side has its own scales, so a series that
// often drops below its forecast gets a wider lower band.
//
// Two checks run at a time, one due an hour after its origin and one six
// hours after: each calibrates the 80 % band at its horizon, and the
// forecast's scale moves between the two in log time, so that a band that
// is right an hour ahead but too narrow six hours ahead (a wandering
// level) gets wider with the horizon. Both checks also correct the tails
// the engine measured (Forecast.TailLower/TailUpper) with the misses of the
// 95 % band. The checks wait in the series' state.Calibration, which costs
// a few bytes per series and O(1) per evaluation, whatever the cadence of
// evaluations (as long as it is at most the finest level's retention).
//
// The scales of state.Calibration are: near lower, near upper, far lower,
// far upper, tail correction lower, tail correction upper.
type Calibration struct {
	// Rate is the step size of the scale updates in log units per unit
	// of miss indicator. Default 0.15.
	Rate float64
	// Min and Max bound the scales. Defaults 0.5 and 6.
	Min, Max float64
}

// checkHorizons are how far ahead the two checks look.
var checkHorizons = [2]time.Duration{time.Hour, 6 * time.Hour}

// Nominal one-sided miss rates of the 80 % and 95 % bands, and their z
// (common-practice normal quantiles, as normQuantile gives them).
const (
	miss80, miss95 = 0.10, 0.025
	z80, z95       = 1.2815515655446004, 1.959963984540054
)

func (c Calibration) params() Calibration {
	if !(c.Rate > 0) {
		c.Rate = 0.15
	}
	if !(c.Min > 0) {
		c.Min = 0.5
	}
	if !(c.Max > c.Min) {
		c.Max = max(6, c.Min)
	}
	return c
}

// Apply scores the checks of cs that have come due in v, applies the
// scales to f and sets aside f as a new check where a slot is free. v must
// be the view f was fitted on: its finest level holds the values the checks
// are scored against.
func (c Calibration) Apply(cs *state.Calibration, v *state.View, f *Forecast) {
	if cs == nil || v == nil || f == nil {
		return
	}
	p := c.params()
	tails := [2]float64{positive(f.TailLower), positive(f.TailUpper)}
	for k := range cs.Due {
		// Due once the finest bucket holding the due time has closed.
		if cs.Due[k] == 0 || len(v.Levels) == 0 || cs.Due[k]+v.Levels[0].Width > v.End {
			continue
		}
		if y, ok := actual(v, cs.Due[k]); ok && cs.SD[k] > 0 {
			p.score(cs, k, (y-float64(cs.Mean[k]))/float64(cs.SD[k]), tails)
		}
		cs.Due[k] = 0 // scored, or its value is gone: either way done
	}
	c.Use(cs, f)

	// A check keeps the engine's mean and standard deviation, which no
	// scale touches, so that scoring measures the raw error against the
	// scales then in force.
	for k, h := range checkHorizons {
		if cs.Due[k] != 0 {
			continue
		}
		dt := h.Seconds()
		m, sd := f.Mean(dt), math.Sqrt(f.Var(dt))
		if !(sd > 0) || math.IsInf(sd, 0) || math.IsNaN(m) || math.IsInf(m, 0) || sd > math.MaxFloat32 || math.Abs(m) > math.MaxFloat32 {
			continue
		}
		cs.Due[k] = f.Origin + h.Milliseconds()
		cs.Mean[k], cs.SD[k] = float32(m), float32(sd)
	}
}

// Use applies the scales of cs to f without scoring or setting aside
// checks: for a second forecast of the same series, such as one by the
// engine a rule names.
func (Calibration) Use(cs *state.Calibration, f *Forecast) {
	if cs == nil || f == nil {
		return
	}
	f.ScaleLower, f.ScaleUpper = scaleOf(cs.Scale[0]), scaleOf(cs.Scale[1])
	f.FarLower, f.FarUpper = f.ScaleLower, f.ScaleUpper
	if cs.Scale[2] > 0 {
		f.FarLower = scaleOf(cs.Scale[2])
	}
	if cs.Scale[3] > 0 {
		f.FarUpper = scaleOf(cs.Scale[3])
	}
	f.NearAt, f.FarAt = checkHorizons[0].Seconds(), checkHorizons[1].Seconds()
	f.TailLower = positive(f.TailLower) * scaleOf(cs.Scale[4])
	f.TailUpper = positive(f.TailUpper) * scaleOf(cs.Scale[5])
}

// score moves the scales after check k (0 near, 1 far) whose value was z
// standard deviations from its mean; tails are the current engine tails.
func (c Calibration) score(cs *state.Calibration, k int, z float64, tails [2]float64) {
	if math.IsNaN(z) {
		return
	}
	for side := range 2 {
		sign := float64(2*side - 1) // lower −1, upper +1
		i := 2*k + side
		s := scaleOf(cs.Scale[i])
		if k == 1 && cs.Scale[i] == 0 {
			s = scaleOf(cs.Scale[side]) // the far scale starts where the near one is
		}
		miss := 0.0
		if sign*z > z80*s {
			miss = 1
		}
		cs.Scale[i] = float32(c.step(s, miss, miss80))
		t := scaleOf(cs.Scale[4+side])
		miss = 0
		if sign*z > z95*s*tails[side]*t {
			miss = 1
		}
		cs.Scale[4+side] = float32(c.step(t, miss, miss95))
	}
	cs.Seen++
}

// step moves a scale after one check.
func (c Calibration) step(s, miss, alpha float64) float64 {
	s *= math.Exp(c.Rate * (miss - alpha))
	return min(max(s, c.Min), c.Max)
}

// scaleOf reads a stored scale; 0 (never set) counts as 1.
func scaleOf(s float32) float64 {
	if !(s > 0) || math.IsInf(float64(s), 0) {
		return 1
	}
	return float64(s)
}

// actual is the value nearest to t in v's finest level: the bucket holding
// t, or failing that the nearest non-empty one within a quarter of an hour
// (a series sampled every few minutes leaves most one-minute buckets
// empty). It reports false when there is none, or when v no longer holds
// t.
func actual(v *state.View, t int64) (float64, bool) {
	if len(v.Levels) == 0 {
		return 0, false
	}
	l := &v.Levels[0]
	if l.Width <= 0 || t < l.Start {
		return 0, false
	}
	i := (t - l.Start) / l.Width
	n := int64(len(l.Y))
	if i >= n {
		return 0, false
	}
	reach := max(int64(15*time.Minute/time.Millisecond)/l.Width, 0)
	for d := int64(0); d <= reach; d++ {
		for _, j := range [2]int64{i + d, i - d} {
			if j >= 0 && j < n && !math.IsNaN(l.Y[j]) {
				return l.Y[j], true
			}
		}
	}
	return 0, false
}
