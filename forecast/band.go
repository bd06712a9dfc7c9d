package forecast

import (
	"math"
	"time"
)

// Var is the predictive variance of one observation dt seconds after the
// origin: the noise of an observation, the uncertainty of the fitted level
// and slope carried to dt, and the transition variance.
func (f *Forecast) Var(dt float64) float64 {
	v := f.Sigma*f.Sigma + f.VarLevel + 2*dt*f.CovLevelSlope + dt*dt*f.VarSlope + f.Transition +
		f.VarSeason + f.Diffusion*max(dt, 0)
	if f.Persist > 0 && dt > f.Age {
		v += f.Persist * (dt - f.Age) * (dt - f.Age)
	}
	// The parameter part is a quadratic form of a covariance matrix and so
	// never negative; rounding can make it so, the observation noise cannot.
	return max(v, f.Sigma*f.Sigma, 0)
}

// Quantile is the p-quantile of an observation dt seconds after the origin:
// normal, with the lower half scaled by ScaleLower and the upper half by
// ScaleUpper (a scale that is not positive counts as 1).
func (f *Forecast) Quantile(dt, p float64) float64 {
	z := normQuantile(p)
	if z == 0 {
		return f.Mean(dt)
	}
	return f.Mean(dt) + z*math.Sqrt(f.Var(dt))*f.scaleAt(z)
}

// Band is the central interval holding the fraction level (such as 0.8) of
// the predictive distribution dt seconds after the origin.
func (f *Forecast) Band(dt, level float64) (lo, hi float64) {
	return f.Quantile(dt, (1-level)/2), f.Quantile(dt, (1+level)/2)
}

// Points appends to dst steps forecast points equally spaced after the
// origin, the last at the horizon, with their 80 % and 95 % bands.
func (f *Forecast) Points(horizon time.Duration, steps int, dst []Point) []Point {
	if steps <= 0 || horizon <= 0 {
		return dst
	}
	ms := horizon.Milliseconds()
	z80, z95 := normQuantile(0.9), normQuantile(0.975)
	lo, hi := f.scale(false), f.scale(true)
	lo95, hi95 := f.scale95(false), f.scale95(true)
	for i := 1; i <= steps; i++ {
		off := int64(math.Round(float64(ms) * float64(i) / float64(steps)))
		dt := float64(off) / 1000
		m, sd := f.Mean(dt), math.Sqrt(f.Var(dt))
		dst = append(dst, Point{
			T:       f.Origin + off,
			Mean:    m,
			Lower80: m - z80*sd*lo, Upper80: m + z80*sd*hi,
			Lower95: m - z95*sd*lo95, Upper95: m + z95*sd*hi95,
		})
	}
	return dst
}

// cdf is the predictive distribution function at y, dt seconds ahead.
func (f *Forecast) cdf(dt, y float64) float64 {
	m := f.Mean(dt)
	sd := math.Sqrt(f.Var(dt)) * f.scale(y > m)
	if sd <= 0 {
		if y < m {
			return 0
		}
		return 1
	}
	return normCDF((y - m) / sd)
}

// scale95 returns the 95 % band scale of the upper or the lower half.
func (f *Forecast) scale95(upper bool) float64 {
	s := f.ScaleLower95
	if upper {
		s = f.ScaleUpper95
	}
	if !(s > 0) || math.IsInf(s, 1) {
		return f.scale(upper)
	}
	return s
}

// scaleAt returns the scale of the quantile z standard deviations from the
// mean: the 80 % scale up to its quantile, the 95 % scale from its own,
// linear in between.
func (f *Forecast) scaleAt(z float64) float64 {
	upper := z > 0
	a := math.Abs(z)
	const z80, z95 = 1.2815515655446004, 1.959963984540054 // normQuantile(0.9), (0.975)
	switch {
	case a <= z80:
		return f.scale(upper)
	case a >= z95:
		return f.scale95(upper)
	}
	w := (a - z80) / (z95 - z80)
	return f.scale(upper)*(1-w) + f.scale95(upper)*w
}

// scale returns the band scale of the upper or the lower half.
func (f *Forecast) scale(upper bool) float64 {
	s := f.ScaleLower
	if upper {
		s = f.ScaleUpper
	}
	if !(s > 0) || math.IsInf(s, 1) {
		return 1
	}
	return s
}
