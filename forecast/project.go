package forecast

import "math"

// Project computes the breach outlook of f under r.
//
// Probability is the largest probability, over the times dt in (0, horizon],
// that an observation at dt lies beyond the threshold. It is found on a grid
// of 32 steps refined by golden-section search, so it costs the same
// whatever the history. ETA is when the mean crosses, solved exactly for the
// straight-line mean. Early and Late are the first times the near and far
// 80 % bounds reach the threshold (the upper and lower bound for Above, the
// lower and upper for Below), from the roots of a quadratic. ETA, Early and
// Late are searched up to four horizons ahead, are 0 when there is no
// crossing in that span and the origin when already beyond.
func Project(f *Forecast, r *Rule) Projection {
	var p Projection
	if f == nil || r == nil || (r.Direction != Above && r.Direction != Below) {
		return p
	}
	h := r.Horizon
	if h <= 0 {
		h = DefaultHorizon
	}
	horizon := h.Seconds()
	span := 4 * horizon
	o := outlook{f: f, d: float64(r.Direction), th: r.Threshold}
	p.Probability = o.probability(horizon)

	// The mean: analytic for a straight line, a scan for a cycle.
	switch gap := o.th - f.Level; {
	case f.Periodic():
		if dt, ok := o.crossing(0, span); ok {
			p.ETA = at(f.Origin, dt)
		}
	case o.d*-gap >= 0:
		p.ETA = f.Origin
	case o.d*f.Slope > 0:
		if dt := gap / f.Slope; dt <= span {
			p.ETA = at(f.Origin, dt)
		}
	}
	z := normQuantile(0.9)
	near, far := z, -z // for Above the upper bound crosses first
	if r.Direction == Below {
		near, far = -z, z
	}
	if dt, ok := o.crossing(near, span); ok {
		p.Early = at(f.Origin, dt)
	}
	if dt, ok := o.crossing(far, span); ok {
		p.Late = at(f.Origin, dt)
	}
	return p
}

// at converts dt seconds after the origin to unix ms.
func at(origin int64, dt float64) int64 {
	return origin + int64(math.Round(dt*1000))
}

// outlook evaluates one forecast against one threshold.
type outlook struct {
	f  *Forecast
	d  float64 // +1 above, -1 below
	th float64
}

// margin is the signed distance of the mean beyond the threshold in
// standard deviations of the side of the distribution the threshold is on:
// normCDF(margin) is the probability of an observation beyond it.
func (o *outlook) margin(dt float64) float64 {
	m := o.f.Mean(dt)
	sd := math.Sqrt(o.f.Var(dt)) * o.f.scale(o.th > m, dt)
	gap := o.d * (m - o.th)
	if sd <= 0 || math.IsNaN(sd) {
		switch {
		case gap >= 0:
			return math.Inf(1)
		default:
			return math.Inf(-1)
		}
	}
	return gap / sd
}

// probability maximises the breach probability over [0, horizon].
func (o *outlook) probability(horizon float64) float64 {
	// A straight-line mean gives a margin with one maximum; a cycle needs
	// a grid fine enough to catch each of its peaks.
	steps := 32
	if o.f.Periodic() {
		steps = int(min(max(math.Ceil(2*horizon/o.f.SeasonStep), 32), 1024))
	}
	best, bj := math.Inf(-1), 0
	for j := 0; j <= steps; j++ {
		if m := o.margin(horizon * float64(j) / float64(steps)); m > best {
			best, bj = m, j
		}
	}
	if math.IsInf(best, -1) {
		return 0 // nothing comparable: NaN throughout
	}
	// Golden-section search around the best grid point; the margin is
	// smooth, and between neighbouring grid points it has one maximum.
	a := horizon * float64(max(bj-1, 0)) / float64(steps)
	b := horizon * float64(min(bj+1, steps)) / float64(steps)
	const g = 0.6180339887498949 // (√5−1)/2
	c, d := b-g*(b-a), a+g*(b-a)
	mc, md := o.margin(c), o.margin(d)
	for range 40 {
		if mc > md {
			b, d, md = d, c, mc
			c = b - g*(b-a)
			mc = o.margin(c)
		} else {
			a, c, mc = c, d, md
			d = a + g*(b-a)
			md = o.margin(d)
		}
	}
	for _, m := range [2]float64{mc, md} {
		if m > best { // false for NaN, unlike max
			best = m
		}
	}
	return normCDF(best)
}

// crossing finds the first dt in [0, span] at which the bound
// Mean + z·sd·scale lies at or beyond the threshold. The bound meets the
// threshold where z²·scale²·Var(dt) = (threshold − Mean(dt))², a quadratic
// in dt; its roots are candidates, checked against the bound itself.
func (o *outlook) crossing(z, span float64) (float64, bool) {
	f := o.f
	beyond := func(dt float64) bool {
		q := f.Mean(dt) + z*math.Sqrt(f.Var(dt))*f.scale(z > 0, dt)
		return o.d*(q-o.th) >= 0
	}
	if beyond(0) {
		return 0, true
	}
	if o.out(z, span) {
		return 0, false
	}
	switch {
	case f.Periodic():
		return scanCrossing(beyond, span, f.SeasonStep/4)
	case f.Persist > 0 && f.Age < span, f.scaled():
		// The variance or its scale is piecewise: no single quadratic.
		return scanCrossing(beyond, span, span/128)
	}
	zs := z * f.scale(z > 0, 0)
	z2 := zs * zs
	c0, b := o.th-f.Level, f.Slope
	A := f.Sigma*f.Sigma + f.VarLevel + f.Transition + f.VarSeason
	alpha := z2*f.VarSlope - b*b
	beta := 2*z2*f.CovLevelSlope + z2*f.Diffusion + 2*c0*b
	gamma := z2*A - c0*c0
	r1, r2, n := quadRoots(alpha, beta, gamma)
	roots := [2]float64{r1, r2}
	for _, t := range roots[:n] {
		if !(t > 0 && t <= span) {
			continue
		}
		// A root of the squared equation is a crossing of this bound when
		// the threshold lies on the bound's side of the mean there; allow
		// for rounding by looking just past the root.
		if beyond(t) {
			return t, true
		}
		if u := t * (1 + 1e-9); u <= span && beyond(u) {
			return u, true
		}
	}
	// Rounding can hide a root; fall back to bisection if the end is beyond.
	if !beyond(span) {
		return 0, false
	}
	return bisect(beyond, 0, span), true
}

// bisect narrows [lo, hi], with beyond false at lo and true at hi, to the
// first dt where beyond holds, to the precision of float64.
func bisect(beyond func(float64) bool, lo, hi float64) float64 {
	for range 100 {
		mid := (lo + hi) / 2
		if mid <= lo || mid >= hi {
			break
		}
		if beyond(mid) {
			hi = mid
		} else {
			lo = mid
		}
	}
	return hi
}

// out reports, from a bound that costs O(1), that the bound
// Mean + z·sd·scale stays short of the threshold over [0, span]: the
// mean can rise no more than the slope and the seasonal swing allow, and
// the variance, a convex function of dt, is largest at an end.
func (o *outlook) out(z, span float64) bool {
	f := o.f
	reach := o.d*(f.Level-o.th) + max(o.d*f.Slope*span, 0)
	if f.Periodic() {
		hi := 0.0
		for _, s := range f.Season {
			hi = max(hi, o.d*s)
		}
		reach += hi
	}
	if o.d*z > 0 {
		sd := math.Sqrt(max(f.Var(0), f.Var(span)))
		s := 1.0
		for _, x := range [...]float64{f.ScaleLower, f.ScaleUpper, f.FarLower, f.FarUpper} {
			s = max(s, positive(x))
		}
		reach += math.Abs(z) * sd * s
	}
	return reach < 0 && !math.IsNaN(reach)
}

// scanCrossing finds the first dt in (0, span] where beyond holds when the
// mean is not a straight line: it steps through the span no coarser than
// step (at most 4096 steps) and bisects the first step that reaches beyond.
// A crossing and return inside one step can be missed; the step is a
// fraction of the seasonal resolution, finer than the cycle itself moves.
func scanCrossing(beyond func(float64) bool, span, step float64) (float64, bool) {
	if !(span > 0) {
		return 0, false
	}
	n := 64
	if step > 0 {
		n = int(min(max(math.Ceil(span/step), 64), 4096))
	}
	prev := 0.0
	for i := 1; i <= n; i++ {
		t := span * float64(i) / float64(n)
		if !beyond(t) {
			prev = t
			continue
		}
		return bisect(beyond, prev, t), true
	}
	return 0, false
}

// quadRoots returns the real roots of a·t² + b·t + c = 0 in ascending
// order, using the cancellation-free form of the quadratic formula.
func quadRoots(a, b, c float64) (r1, r2 float64, n int) {
	if a == 0 || math.Abs(a) < 1e-300 {
		if b == 0 {
			return 0, 0, 0
		}
		return -c / b, 0, 1
	}
	disc := b*b - 4*a*c
	if disc < 0 || math.IsNaN(disc) {
		return 0, 0, 0
	}
	q := -0.5 * (b + math.Copysign(math.Sqrt(disc), b))
	if q == 0 {
		return 0, 0, 1
	}
	r1, r2 = q/a, c/q
	if r1 > r2 {
		r1, r2 = r2, r1
	}
	return r1, r2, 2
}
