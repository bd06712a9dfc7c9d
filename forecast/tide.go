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
// up the cycle; each phase of the cycle is then the median, over the
// cycles seen, of the values less that average, and the phases are
// centred to sum to zero. A median over a week of daily cycles is not
// moved by one anomalous day. A second period that is a multiple of the
// first (a week of days) is folded into the same profile as a
// day-of-week offset: the median level of each day less the profile,
// detrended by a robust line over the days, then the median per day of
// the week, so that two weeks of history are enough; days start at the
// hour where the days of the week differ most.
//
// Level and slope come from Incline on the composite history less the
// profile, so that a cycle on a trend forecasts both and a level shift is
// still followed. Sigma, the parameter variances and the transition are
// Incline's on the deseasonalized history; VarSeason is the variance of
// the profile, π/2·σ²/cycles for a median of cycles values of noise σ.
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
		if p < 2 || len(y) < (minCycles+1)*p {
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
	for i := range nv {
		dv.Y[i] = v.Y[i] - season.Seasonal(v.T[i])
	}
	if !e.Incline.Fit(dv, sc, f) {
		return false
	}
	f.Engine = e.Name()
	f.Cycle = time.Duration(pr.p) * time.Duration(width) * time.Millisecond
	if pr.p2 > 0 {
		f.Cycle2 = time.Duration(pr.p2) * time.Duration(width) * time.Millisecond
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

	// Prefix sums of the values less a reference, which keeps them small.
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
	// The centred moving average over one period: 2×p for an even p,
	// whose two end values weigh half. Defined where the whole window
	// lies in the series and at least half of it holds values.
	cs.trend = grow(cs.trend, n)
	trend := cs.trend
	h := p / 2
	for t := range n {
		trend[t] = math.NaN()
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
			trend[t] = ref + s/w
		}
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
	if perPhase < float64(minCycles)-1 {
		// The moving average costs a cycle at the ends.
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
