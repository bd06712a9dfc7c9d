package forecast

import (
	"math"
	"time"

	"github.com/headroom-dev/headroom/state"
)

// Calibration keeps the bands of one series honest online, after adaptive
// conformal inference (Gibbs & Candès, 2021): every so often a forecast is
// set aside as a check; when its time comes, the value that arrived is
// compared with each side of its 80 % and 95 % bands, and the scale of that
// side moves up after a miss and down after a hit, in proportions that
// settle where misses happen at the nominal rate (10 % per side of the 80 %
// band, 2.5 % of the 95 % band). Each side has its own scales, so a series
// that often drops below its forecast gets a wider lower band.
//
// Checks are due one and six hours after their origin: one hour gives
// many checks, six hours lets the scales see how errors grow with the
// horizon. Checks wait in the series' state.Calibration, so calibration
// costs a few bytes per series and O(1) per evaluation, whatever the
// cadence of evaluations (as long as it is at most the finest level's
// retention).
type Calibration struct {
	// Rate is the step size of the scale updates in log units per unit
	// of miss indicator. Default 0.15.
	Rate float64
	// Min and Max bound the scales. Defaults 0.5 and 6.
	Min, Max float64
}

// checkHorizons are how far ahead the two checks look.
var checkHorizons = [2]time.Duration{time.Hour, 6 * time.Hour}

// Nominal one-sided miss rates of the 80 % and 95 % bands, and their z.
const (
	miss80, miss95 = 0.10, 0.025
	z80, z95       = 1.2815515655446004, 1.959963984540054 // common-practice normal quantiles, as normQuantile
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
	for k := range cs.Due {
		// Due once the finest bucket holding the due time has closed.
		if cs.Due[k] == 0 || len(v.Levels) == 0 || cs.Due[k]+v.Levels[0].Width > v.End {
			continue
		}
		if y, ok := actual(v, cs.Due[k]); ok && cs.SD[k] > 0 {
			p.score(cs, (y-float64(cs.Mean[k]))/float64(cs.SD[k]))
		}
		cs.Due[k] = 0 // scored, or its value is gone: either way done
	}
	f.ScaleLower, f.ScaleUpper = scaleOf(cs.Scale[0]), scaleOf(cs.Scale[1])
	f.ScaleLower95, f.ScaleUpper95 = scaleOf(cs.Scale[2]), scaleOf(cs.Scale[3])
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

// score moves the four scales after a check whose value was z standard
// deviations from its mean.
func (c Calibration) score(cs *state.Calibration, z float64) {
	if math.IsNaN(z) {
		return
	}
	type side struct {
		i     int
		z     float64 // band edge in standard deviations, signed
		alpha float64
	}
	for _, s := range [4]side{{0, -z80, miss80}, {1, z80, miss80}, {2, -z95, miss95}, {3, z95, miss95}} {
		sc := scaleOf(cs.Scale[s.i])
		edge := s.z * sc
		miss := 0.0
		if (s.z < 0 && z < edge) || (s.z > 0 && z > edge) {
			miss = 1
		}
		sc *= math.Exp(c.Rate * (miss - s.alpha))
		cs.Scale[s.i] = float32(min(max(sc, c.Min), c.Max))
	}
	cs.Seen++
}

// scaleOf reads a stored scale; 0 (never set) counts as 1.
func scaleOf(s float32) float64 {
	if !(s > 0) || math.IsInf(float64(s), 0) {
		return 1
	}
	return float64(s)
}

// actual is the value of the finest-level bucket holding t, if v still has
// it and it is not empty.
func actual(v *state.View, t int64) (float64, bool) {
	if len(v.Levels) == 0 {
		return 0, false
	}
	l := &v.Levels[0]
	if l.Width <= 0 || t < l.Start {
		return 0, false
	}
	i := (t - l.Start) / l.Width
	if i >= int64(len(l.Y)) {
		return 0, false
	}
	y := l.Y[i]
	return y, !math.IsNaN(y)
}
