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

// trendClip winsorizes the values under the moving average of the profile
// at this many robust standard deviations of their distance to the plain
// average.
const trendClip = 3.0

// trendRounds bounds the rounds of winsorizing under the profile.
const trendRounds = 4

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

// profile estimates the seasonal profile of pr into cs.season (see Tide)
// and returns its variance. It reports false when some phase has no
// value or the profile is not finite.
func (cs *cycleScratch) profile(pr profile, minCycles int) (float64, bool) {
	y, off := trimNaN(pr.lv.Y)
	n, p := len(y), pr.p
	// Absolute bucket index of y[0]; phases count from the epoch so that
	// they stay put from one fit to the next.
	j0 := floorDiv(pr.lv.Start, pr.lv.Width) + int64(off)

	trend := cs.robustTrend(y, p)
	// The trend's slope per bucket, from its first to its last value, for
	// the detail within a bucket (refine).
	cs.slope = 0
	if a, b := firstLast(trend); b > a {
		cs.slope = (trend[b] - trend[a]) / float64(b-a)
	}

	// Each phase: the median over cycles of the values less the trend.
	// The values of a phase lie p apart; the detrended ones go to tmp.
	cs.season = grow(cs.season, max(p, pr.p2))
	season := cs.season
	cs.tmp = grow(cs.tmp, n)
	cs.d = grow(cs.d, n)
	resid := cs.d[:0] // detrended values less their phase, for the noise
	cycles := 0
	for k := range p {
		// First t with (j0+t) mod p == k.
		t0 := int((int64(k) - j0%int64(p) + 2*int64(p)) % int64(p))
		m := 0
		for t := t0; t < n; t += p {
			if d := y[t] - trend[t]; d == d {
				cs.tmp[m] = d
				m++
			}
		}
		if m == 0 {
			return 0, false
		}
		cycles += m
		season[k] = median(cs.tmp[:m])
	}
	mean := 0.0
	for k := range p {
		mean += season[k]
	}
	mean /= float64(p)
	for k := range p {
		season[k] -= mean
	}
	for t := range n {
		if d := y[t] - trend[t]; d == d {
			k := int((j0 + int64(t)) % int64(p))
			resid = append(resid, math.Abs(d-season[k]))
		}
	}
	perPhase := float64(cycles) / float64(p)
	if perPhase < float64(minCycles)-0.5 {
		return 0, false
	}
	sigma := 1.4826 * median(resid)
	varSeason := math.Pi / 2 * sigma * sigma / perPhase
	cs.season = season[:p]

	if pr.p2 > 0 {
		v, ok := cs.fold(y, j0, p, pr.p2)
		if ok {
			varSeason += v
		}
	}
	if math.IsNaN(varSeason) || math.IsInf(varSeason, 0) {
		return 0, false
	}
	for _, s := range cs.season {
		if s != s || math.IsInf(s, 0) {
			return 0, false
		}
	}
	return varSeason, true
}

// robustTrend stores in cs.trend the centred moving average of y over one
// period p (2×p with half-weight ends for an even p), NaN where the whole
// window does not lie in y or holds fewer than half its values, and
// returns it. The values are first winsorized against the plain average
// at trendClip robust standard deviations of their distance to it, for up
// to trendRounds rounds against the average of the round before: a spike
// or a burst then moves the average under the profile by a bounded amount
// (a winsorized value still counts, at the limit), while the cycle itself,
// which the distance holds in full, passes.
func (cs *cycleScratch) robustTrend(y []float64, p int) []float64 {
	n := len(y)
	cs.trend = grow(cs.trend, n)
	trend := cs.trend
	cs.movingAverage(y, p, trend)
	cs.tmp = grow(cs.tmp, n)
	m := 0
	for t, v := range y {
		if d := v - trend[t]; d == d {
			cs.tmp[m] = d
			m++
		}
	}
	if m == 0 {
		return trend
	}
	// The distance from the average itself, not from its median: a cycle
	// that spends most of its period at one level (a working day's
	// plateau and a long night) has most distances alike, and their
	// spread about their median would take the plateau for outliers.
	for i := range cs.tmp[:m] {
		cs.tmp[i] = math.Abs(cs.tmp[i])
	}
	sd := 1.4826 * median(cs.tmp[:m])
	if !(sd > 0) {
		// More than half the values on the average itself (a flat
		// stretch): the mean distance instead.
		for _, a := range cs.tmp[:m] {
			sd += a
		}
		sd = sd / float64(m) * math.Sqrt(math.Pi/2)
	}
	if !(sd > 0) || math.IsInf(sd, 0) {
		return trend
	}
	// A burst of several values lifts the first average and with it the
	// limits: winsorize again against the new average, a few rounds.
	lim := trendClip * sd
	cs.d = grow(cs.d, n)
	w := cs.d
	for range trendRounds {
		clipped := false
		for t, v := range y {
			w[t] = v
			if c := trend[t]; v == v && c == c {
				if u := min(max(v, c-lim), c+lim); u != v {
					w[t], clipped = u, true
				}
			}
		}
		if !clipped {
			break
		}
		cs.movingAverage(w, p, trend)
	}
	extend(trend)
	return trend
}

// extend carries a moving average over the half period at each end of the
// series where its window does not fit, along a straight line through
// its first and last values, so that every cycle of the history counts in
// the profile: with two or three cycles of history the ends are a good
// part of it, and the newest half cycle is the most current.
func extend(trend []float64) {
	a, b := firstLast(trend)
	if b < a {
		return
	}
	g := 0.0
	if b > a {
		g = (trend[b] - trend[a]) / float64(b-a)
	}
	for t := 0; t < a; t++ {
		trend[t] = trend[a] - g*float64(a-t)
	}
	for t := b + 1; t < len(trend); t++ {
		trend[t] = trend[b] + g*float64(t-b)
	}
}

// movingAverage stores in out the centred moving average of y over p
// points (see robustTrend) by prefix sums of the values less a reference,
// which keeps the sums small.
func (cs *cycleScratch) movingAverage(y []float64, p int, out []float64) {
	n := len(y)
	ref := math.NaN()
	for _, v := range y {
		if v == v {
			ref = v
			break
		}
	}
	cs.pre = grow(cs.pre, n+1)
	if cap(cs.cnt) < n+1 {
		cs.cnt = make([]int32, n+1)
	}
	cs.cnt = cs.cnt[:n+1]
	pre, cnt := cs.pre, cs.cnt
	pre[0], cnt[0] = 0, 0
	for i, v := range y {
		pre[i+1], cnt[i+1] = pre[i], cnt[i]
		if v == v {
			pre[i+1] += v - ref
			cnt[i+1]++
		}
	}
	h := p / 2
	for t := range n {
		out[t] = math.NaN()
		if t < h || t+h >= n {
			continue
		}
		s := pre[t+h+1] - pre[t-h]
		w := float64(cnt[t+h+1] - cnt[t-h])
		if p%2 == 0 {
			for _, u := range [2]float64{y[t-h], y[t+h]} {
				if u == u {
					s -= (u - ref) / 2
					w -= 0.5
				}
			}
		}
		if w >= float64(p)/2 {
			out[t] = ref + s/w
		}
	}
}

// fold extends the profile of period p in cs.season to the second period
// p2 = m·p with an offset per cycle position (day of the week). The
// boundary between cycles is where the levels of the m positions differ
// most (a week turns at local midnight, not at the epoch's); the level of
// each whole cycle is the median of its values less the profile, less a
// robust line over the cycles; each position's offset is the median of
// its cycles, centred. It returns the variance of the offsets and false
// when a position has no cycle.
func (cs *cycleScratch) fold(y []float64, j0 int64, p, p2 int) (float64, bool) {
	n, m := len(y), p2/p
	if m > 64 {
		return 0, false
	}
	P := int64(p)
	var sum [64]float64
	var cnt [64]int
	bestO, bestS := 0, math.Inf(-1)
	for o := range p {
		// Cycle c covers absolute indices [c·p+o, (c+1)·p+o).
		sum, cnt = [64]float64{}, [64]int{}
		all, N := 0.0, 0
		for c := floorDiv(j0-int64(o)+P-1, P); (c+1)*P+int64(o)-j0 <= int64(n); c++ {
			t0 := int(c*P + int64(o) - j0)
			s, k := 0.0, 0
			for t := t0; t < t0+p; t++ {
				if v := y[t]; v == v {
					s += v - cs.season[(t+int(j0%P))%p]
					k++
				}
			}
			if 2*k < p {
				continue
			}
			g := int((c%int64(m) + int64(m)) % int64(m))
			sum[g] += s / float64(k)
			cnt[g]++
			all += s / float64(k)
			N++
		}
		if N == 0 {
			continue
		}
		ssb := -all * all / float64(N)
		for g := range m {
			if cnt[g] > 0 {
				ssb += sum[g] * sum[g] / float64(cnt[g])
			}
		}
		if ssb > bestS {
			bestO, bestS = o, ssb
		}
	}
	o := int64(bestO)
	cs.day = cs.day[:0]
	cs.dayAt = cs.dayAt[:0]
	for c := floorDiv(j0-o+P-1, P); (c+1)*P+o-j0 <= int64(n); c++ {
		t0 := int(c*P + o - j0)
		k := 0
		for t := t0; t < t0+p; t++ {
			if v := y[t]; v == v {
				cs.tmp[k] = v - cs.season[(t+int(j0%P))%p]
				k++
			}
		}
		if 2*k < p {
			continue
		}
		cs.day = append(cs.day, median(cs.tmp[:k]))
		cs.dayAt = append(cs.dayAt, float64(c))
	}
	nd := len(cs.day)
	if nd < m {
		return 0, false
	}
	b := pairSlope(cs.dayAt, cs.day, cs.tmp)
	for i := range cs.day {
		cs.day[i] -= b * cs.dayAt[i]
	}
	var off [64]float64
	pos := func(c float64) int { return int((int64(c)%int64(m) + int64(m)) % int64(m)) }
	for g := range m {
		k := 0
		for i, c := range cs.dayAt {
			if pos(c) == g {
				cs.tmp[k] = cs.day[i]
				k++
			}
		}
		if k == 0 {
			return 0, false
		}
		off[g] = median(cs.tmp[:k])
	}
	mean := 0.0
	for g := range m {
		mean += off[g]
	}
	mean /= float64(m)
	for i, c := range cs.dayAt {
		cs.tmp[i] = math.Abs(cs.day[i] - off[pos(c)])
	}
	sd := 1.4826 * median(cs.tmp[:nd])
	// Bucket k of the long profile has absolute index j ≡ k (mod p2); it
	// lies in cycle c = ⌊(j−o)/p⌋, whose position c mod m is
	// ⌊(k−o)/p⌋ mod m, as p2 = m·p.
	cs.season = grow(cs.season, p2)
	season := cs.season
	for k := p2 - 1; k >= 0; k-- {
		g := int((floorDiv(int64(k)-o, P)%int64(m) + int64(m)) % int64(m))
		season[k] = season[k%p] + off[g] - mean
	}
	cs.season = season[:p2]
	return math.Pi / 2 * sd * sd * float64(m) / float64(nd), true
}

// floorDiv is a/b rounded toward −∞, for b > 0.
func floorDiv(a, b int64) int64 {
	q := a / b
	if a%b != 0 && a < 0 {
		q--
	}
	return q
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

// maxSeason bounds the length of a refined profile.
const maxSeason = 1024

// finerLevel returns the level of v whose width is the largest that
// divides lv's width into at least two, nil when there is none.
func finerLevel(v *state.View, lv *state.LevelView) *state.LevelView {
	var best *state.LevelView
	for i := range v.Levels {
		l := &v.Levels[i]
		if l.Width <= 0 || l.Width >= lv.Width || lv.Width%l.Width != 0 {
			continue
		}
		if best == nil || l.Width > best.Width {
			best = l
		}
	}
	return best
}

// refine turns the profile in cs.season, on buckets of width w with a
// cycle of p buckets, into one on the buckets of the finer level lv, r to
// a bucket. An hourly profile interpolated linearly cannot follow a step
// inside the hour, nor one on the hour; the finer level, which holds too
// few cycles for a profile of its own (a day of fifteen-minute buckets),
// shows the shape within each bucket.
//
// The finer profile keeps each bucket's level from the coarse profile,
// which rests on many cycles, and takes the shape within it from the
// linear interpolation of the coarse profile, corrected by the detail the
// finer level shows: each finer value less the mean of its bucket, less
// the interpolated shape there and the trend's slope, averaged per finer
// phase of the cycle. The detail is shrunk by its own signal-to-noise
// ratio: a non-negative garrote (Breiman 1995) at the universal threshold
// √(2·ln n) standard errors for n details (Donoho & Johnstone 1994), which
// pure noise stays below with a probability that tends to one, the noise
// being the robust spread of all details. A detail of z standard errors
// keeps 1 − λ²/z² of itself, so a step inside a bucket (tens of standard
// errors) passes almost whole, and a smooth cycle keeps its
// interpolated shape and a day of unusual amplitude changes little: only
// the shape within buckets is taken from the finer level, never a
// bucket's level. It reports false, leaving cs.season alone, when no
// detail survives or the finer profile would be too long, and otherwise
// returns the variance the detail adds.
func (cs *cycleScratch) refine(lv *state.LevelView, w int64, p int) (float64, bool) {
	r := int(w / lv.Width)
	L := len(cs.season)
	if r < 2 || p < 2 || L%p != 0 || L*r > maxSeason || lv.Width <= 0 {
		return 0, false
	}
	n2, pd := L*r, p*r // finer profile; period of the detail
	y, off := trimNaN(lv.Y)
	if len(y) < pd {
		// The finer level must show a whole cycle: a detail seen for a
		// part of it would refine that part only, from whatever happened
		// to fall in it.
		return 0, false
	}
	j0 := floorDiv(lv.Start, lv.Width) + int64(off) // absolute index of y[0]

	// The interpolated shape within each bucket of the first cycle, centred
	// on the bucket. A second cycle folded in (a week of days) shifts
	// whole days, which the coarse buckets' levels carry; the shape is
	// that of the first cycle's profile, the mean over the second's
	// positions.
	base := cs.season[:p]
	if L > p {
		cs.base = grow(cs.base, p)
		base = cs.base
		m := L / p
		for k := range p {
			sum := 0.0
			for g := range m {
				sum += cs.season[k+g*p]
			}
			base[k] = sum / float64(m)
		}
	}
	cs.shape = grow(cs.shape, pd)
	shape := cs.shape
	for k := range pd {
		x := (float64(k)+0.5)/float64(r) - 0.5 // in coarse positions
		i := int(math.Floor(x))
		fr := x - float64(i)
		i = (i%p + p) % p
		shape[k] = base[i]*(1-fr) + base[(i+1)%p]*fr
	}
	for b := 0; b < pd; b += r {
		m := 0.0
		for _, v := range shape[b : b+r] {
			m += v
		}
		m /= float64(r)
		for u := b; u < b+r; u++ {
			shape[u] -= m
		}
	}

	// The detail per phase of the finer cycle: sums and counts.
	cs.dsum = grow(cs.dsum, pd)
	if cap(cs.dcnt) < pd {
		cs.dcnt = make([]int32, pd)
	}
	cs.dcnt = cs.dcnt[:pd]
	dsum, dcnt := cs.dsum, cs.dcnt
	clear(dsum)
	clear(dcnt)
	cs.tmp = grow(cs.tmp, len(y))
	ne := 0
	g := cs.slope / float64(r) // the trend per finer bucket
	// The first finer bucket that starts a coarse one.
	t0 := int((int64(r) - j0%int64(r)) % int64(r))
	for t := t0; t+r <= len(y); t += r {
		var ym, sm float64
		k := 0
		for u := range r {
			if v := y[t+u]; v == v {
				ph := int(((j0+int64(t+u))%int64(pd) + int64(pd)) % int64(pd))
				ym += v - g*float64(u)
				sm += shape[ph]
				k++
			}
		}
		if k < 2 {
			continue // no shape within the bucket
		}
		ym /= float64(k)
		sm /= float64(k)
		for u := range r {
			v := y[t+u]
			if v != v {
				continue
			}
			ph := int(((j0+int64(t+u))%int64(pd) + int64(pd)) % int64(pd))
			e := (v - g*float64(u) - ym) - (shape[ph] - sm)
			dsum[ph] += e
			dcnt[ph]++
			cs.tmp[ne] = math.Abs(e)
			ne++
		}
	}
	if ne == 0 {
		return 0, false
	}
	// Noise of one detail: robust, or the mean deviation when more than
	// half are zero; zero noise keeps every detail whole.
	sd := 1.4826 * median(cs.tmp[:ne])
	if !(sd > 0) {
		for _, a := range cs.tmp[:ne] {
			sd += a
		}
		sd = sd / float64(ne) * math.Sqrt(math.Pi/2)
	}
	if math.IsNaN(sd) || math.IsInf(sd, 0) {
		return 0, false
	}
	v2 := sd * sd
	lam2 := 2 * math.Log(float64(max(pd, 2)))
	kept := false
	varD := 0.0
	for k := range pd {
		if dcnt[k] == 0 {
			continue
		}
		c := float64(dcnt[k])
		e := dsum[k] / c
		dsum[k] = 0
		if e2 := e * e; e2 > 0 && c*e2 > lam2*v2 {
			f := 1 - lam2*v2/(c*e2)
			dsum[k] = f * e
			varD += f * f * v2 / c
			// Details that all stay within one standard error after
			// shrinking are not worth a longer profile.
			kept = kept || math.Abs(f*e) >= sd
		}
	}
	if !kept {
		return 0, false
	}

	// Shrinking moved the detail's mean within a bucket: centre it again
	// over the phases seen.
	for b := 0; b < pd; b += r {
		m, k := 0.0, 0
		for u := b; u < b+r; u++ {
			if dcnt[u] > 0 {
				m += dsum[u]
				k++
			}
		}
		if k == 0 {
			continue
		}
		m /= float64(k)
		for u := b; u < b+r; u++ {
			if dcnt[u] > 0 {
				dsum[u] -= m
			}
		}
	}
	fillCyclic(dsum, dcnt)
	// A detail rests on one or two cycles of the finer level; what many
	// cycles of the coarse one say bounds it: a bucket's shape can move
	// toward its neighbours' levels by as much as they differ from it,
	// not more. A step from one bucket's level to the next passes; a
	// one-off spike where the coarse profile is flat does not.
	for k := range pd {
		c := k / r
		b := max(math.Abs(base[c]-base[(c+p-1)%p]), math.Abs(base[(c+1)%p]-base[c]))
		dsum[k] = min(max(dsum[k], -b), b)
	}
	cs.fine = grow(cs.fine, n2)
	for k := range n2 {
		cs.fine[k] = cs.season[k/r] + shape[k%pd] + dsum[k%pd]
	}
	cs.season, cs.fine = cs.fine, cs.season
	return varD / float64(pd), true
}

// fillCyclic interpolates linearly, around the cycle, the values of x
// whose count is zero between the nearest values with a count: a series
// sampled every five minutes fills one minute bucket in five, and the
// forecast between samples is best the line between them.
func fillCyclic(x []float64, cnt []int32) {
	n := len(x)
	first := -1
	for k := range n {
		if cnt[k] > 0 {
			first = k
			break
		}
	}
	if first < 0 {
		clear(x)
		return
	}
	prev := first
	for step := 1; step <= n; step++ {
		k := (first + step) % n
		if cnt[k] == 0 {
			continue
		}
		gap := (k - prev + n) % n
		if gap == 0 {
			gap = n // a single phase with a count
		}
		for j := 1; j < gap; j++ {
			fr := float64(j) / float64(gap)
			x[(prev+j)%n] = x[prev]*(1-fr) + x[k]*fr
		}
		prev = k
	}
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

// firstLast returns the indices of the first and last non-NaN values of
// y, (0, -1) when there is none.
func firstLast(y []float64) (int, int) {
	a, b := 0, len(y)-1
	for a <= b && y[a] != y[a] {
		a++
	}
	for b >= a && y[b] != y[b] {
		b--
	}
	if a > b {
		return 0, -1
	}
	return a, b
}
