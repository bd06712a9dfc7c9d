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
// normal, each side scaled by its calibration (see Forecast).
func (f *Forecast) Quantile(dt, p float64) float64 {
	z := normQuantile(p)
	if z == 0 {
		return f.Mean(dt)
	}
	return f.Mean(dt) + z*math.Sqrt(f.Var(dt))*f.scaleAt(z, dt)
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
	tl, tu := positive(f.TailLower), positive(f.TailUpper)
	for i := 1; i <= steps; i++ {
		off := int64(math.Round(float64(ms) * float64(i) / float64(steps)))
		dt := float64(off) / 1000
		m, sd := f.Mean(dt), math.Sqrt(f.Var(dt))
		lo, hi := f.scale(false, dt), f.scale(true, dt)
		dst = append(dst, Point{
			T:       f.Origin + off,
			Mean:    m,
			Lower80: m - z80*sd*lo, Upper80: m + z80*sd*hi,
			Lower95: m - z95*sd*lo*tl, Upper95: m + z95*sd*hi*tu,
		})
	}
	return dst
}

// cdf is the predictive distribution function at y, dt seconds ahead.
func (f *Forecast) cdf(dt, y float64) float64 {
	m := f.Mean(dt)
	sd := math.Sqrt(f.Var(dt)) * f.scale(y > m, dt)
	if sd <= 0 {
		if y < m {
			return 0
		}
		return 1
	}
	return normCDF((y - m) / sd)
}

// scaleAt returns the scale of the quantile z standard deviations from the
// mean, dt seconds ahead: the 80 % band's up to its quantile, the 95 %
// band's from its own, linear in between.
func (f *Forecast) scaleAt(z, dt float64) float64 {
	upper := z > 0
	s := f.scale(upper, dt)
	a := math.Abs(z)
	if a <= z80 {
		return s
	}
	t := positive(f.TailLower)
	if upper {
		t = positive(f.TailUpper)
	}
	w := min((a-z80)/(z95-z80), 1)
	return s * (1 + w*(t-1))
}

// scale returns the 80 % band scale of the upper or the lower half dt
// seconds ahead.
func (f *Forecast) scale(upper bool, dt float64) float64 {
	near, far := positive(f.ScaleLower), positive(f.FarLower)
	if upper {
		near, far = positive(f.ScaleUpper), positive(f.FarUpper)
	}
	if !(f.FarAt > f.NearAt) || !(f.NearAt > 0) || dt <= f.NearAt || near == far {
		return near
	}
	if dt >= f.FarAt {
		return far
	}
	w := math.Log(dt/f.NearAt) / math.Log(f.FarAt/f.NearAt)
	return near + w*(far-near)
}

// scaled reports whether the band scales change with the horizon.
func (f *Forecast) scaled() bool {
	return f.FarAt > f.NearAt && f.NearAt > 0 &&
		(positive(f.ScaleLower) != positive(f.FarLower) || positive(f.ScaleUpper) != positive(f.FarUpper))
}

// positive returns s, or 1 when s is not a positive finite number.
func positive(s float64) float64 {
	if !(s > 0) || math.IsInf(s, 1) {
		return 1
	}
	return s
}
