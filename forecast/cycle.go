package forecast

import (
	"math"
	"time"

	"github.com/headroom-dev/headroom/state"
)

// Tuning of cycle detection. The false-detection rate they give on white
// noise and on random walks is measured in cycle_test.go.
const (
	// cycleZ is the Bartlett band a peak of the autocorrelation must clear,
	// in standard errors. Tens of lags are searched at once, so the usual
	// 1.96 would find a cycle in noise far too often.
	cycleZ = 2.7
	// cycleSure caps the band: a strong cycle in a short history swells
	// the Bartlett errors with its own autocorrelation at shorter lags
	// (the band tests for no correlation at all at the lag, which the
	// cycle makes untrue everywhere), yet a peak this high after a dip of
	// cycleRise is no accident.
	cycleSure = 0.6
	// cycleFloor is the least autocorrelation (bias-corrected for the lag)
	// that counts as a cycle, whatever the band says: below it the
	// pattern is too weak to forecast with.
	cycleFloor = 0.25
	// cycleRise is how far a peak must rise above the lowest
	// autocorrelation at a shorter lag. A cycle swings the autocorrelation
	// down between its peaks; what a straight line leaves of a wandering
	// level or a level shift only decays.
	cycleRise = 0.3
	// cycleSwing is the least peak that a trough-to-peak swing of twice
	// cycleRise makes a cycle without the band.
	cycleSwing = 0.4
	// cycleStrong: the first peak that reaches this fraction of the
	// highest is the period, so a daily cycle is found as daily even when
	// the weekly peak is higher.
	cycleStrong = 0.8
	// cycleMargin is how far a second period's autocorrelation must stand
	// above those of its neighbouring multiples of the first, and how far
	// below the first period's it may lie.
	cycleMargin = 0.05
	// cycleClip winsorizes the detrended values at this many robust
	// standard deviations, so that a gross spike cannot dominate the sums
	// while the peaks of a smooth cycle, within about one, pass.
	cycleClip = 4.0
	// cycleTwoDays is the correlation two days of a history shorter than
	// three days must show hour by hour to count as a daily cycle (see
	// twoDays); its false-detection rate is measured in cycle_test.go.
	cycleTwoDays = 0.8
)

// Period ranges searched on a view: the coarsest level for cycles of
// hours to a week, the next finer one for cycles of an hour to a few hours.
const (
	day                = 24 * time.Hour
	longMin, longMax   = 3 * time.Hour, 7 * 24 * time.Hour
	shortMin, shortMax = time.Hour, 8 * time.Hour
)

// cycleScratch is the working memory of cycle detection and of Tide.
type cycleScratch struct {
	d, r, se []float64 // detrended series, its autocorrelation, Bartlett errors
	tmp      []float64 // selection space
	trend    []float64 // moving average under the profile
	pre      []float64 // prefix sums for it
	cnt      []int32   // prefix counts of values
	season   []float64 // the seasonal profile handed out in Forecast.Season
	day      []float64 // day levels for a folded second period
	ma       []float64 // the series less a moving average
	window   int       // when > 1, detrend by a moving average of this many points
	dayAt    []float64 // their day indices
	view     state.View

	// The finer profile (tide.go): the first cycle's profile, the
	// interpolated shape within each
	// coarse bucket, the detail per finer phase (sums, then values) and
	// its counts, the finer profile, the integral of the profile for the
	// means over buckets, and the trend's slope per coarse bucket.
	base, shape, dsum, fine, cum []float64
	dcnt                         []int32
	slope                        float64
}

// DetectCycles looks for cycles in v's uniform levels. The coarsest level
// (hourly in the default layout) is searched for periods from 3 hours to
// a week, at most half its span: the autocorrelation at a lag needs
// several cycles behind it, so a weekly cycle is seen from two weeks of
// history on. When it finds none, the next finer level (fifteen minutes)
// is searched for periods from one hour to eight hours, and also when the
// coarsest level found a cycle that short, which the finer level resolves
// better; a daily or weekly cycle is kept from the coarsest level. See
// detect for the method.
//
// A history of two to three days is too short for the autocorrelation at
// a day's lag; when the search finds nothing there, a daily cycle is
// taken from how closely the last two days agree hour by hour (twoDays).
//
// At is the end of the coarsest level's newest bucket, so that callers
// can repeat detection only when a new one has closed. A nil sc is allowed
// but allocates.
func DetectCycles(v *state.View, sc *Scratch) Cycles {
	var c Cycles
	if v == nil {
		return c
	}
	if sc == nil {
		sc = NewScratch()
	}
	long, short := cycleLevels(v)
	if long < 0 {
		return c
	}
	c.At = levelEnd(&v.Levels[long])
	c = sc.cyc.detectLevel(&v.Levels[long], longMin, longMax, c)
	if c.Period == 0 || c.Period > day {
		// A daily cycle under slower changes (a lower weekend, a trend
		// that bends) can hide from a straight-line detrending, or show
		// only as a longer pattern: look again with a day's moving average
		// taken out. A longer period found first stays as the second
		// period when it is a whole number of days.
		lv := &v.Levels[long]
		if w := time.Duration(lv.Width) * time.Millisecond; w > 0 && day%w == 0 && day/w >= 4 {
			// A second look is a second chance for noise too: only a
			// calendar period counts.
			sc.cyc.window = int(day / w)
			if d := sc.cyc.detectLevel(lv, longMin, day, Cycles{At: c.At}); onCalendar(d.Period) {
				if c.Period > day && c.Period%d.Period == 0 && onCalendar(c.Period) {
					d.Period2 = c.Period
				}
				c = d
			}
			sc.cyc.window = 0
		}
	}
	if c.Period == 0 {
		if r, ok := sc.cyc.twoDays(&v.Levels[long]); ok {
			c.Period, c.ACF = day, r
		}
	}
	if c.Period > 0 && c.Period > shortMax || short < 0 {
		return c
	}
	// Nothing, or a cycle of hours, which the finer level resolves
	// better: a cycle shorter than two buckets shows in the coarser one
	// only as an alias.
	if s := sc.cyc.detectLevel(&v.Levels[short], shortMin, shortMax, c); s.Period > 0 {
		return s
	}
	return c
}

// twoDays looks for a daily cycle in a history of two to three days on
// the level lv, too short for the autocorrelation (whose bias correction
// at a lag of half the series doubles its noise): the last two whole days,
// each less its own least-squares line, must correlate by at least
// cycleTwoDays over the hours both hold. Each day's line takes out what a
// random walk or a level shift puts into it, so that what is left of two
// unrelated days rarely lines up hour by hour. It returns the correlation.
func (cs *cycleScratch) twoDays(lv *state.LevelView) (float64, bool) {
	w := time.Duration(lv.Width) * time.Millisecond
	if w <= 0 || day%w != 0 {
		return 0, false
	}
	p := int(day / w)
	y, _ := trimNaN(lv.Y)
	n := len(y)
	if p < 8 || n < 2*p || n >= 3*p {
		return 0, false
	}
	a, b := y[n-2*p:n-p], y[n-p:]
	cs.tmp = grow(cs.tmp, 2*p)
	da, db := cs.tmp[:p], cs.tmp[p:2*p]
	if !lineResid(a, b, da) || !lineResid(b, a, db) {
		return 0, false
	}
	var sab, saa, sbb float64
	for i := range p {
		sab += da[i] * db[i]
		saa += da[i] * da[i]
		sbb += db[i] * db[i]
	}
	if !(saa > 0 && sbb > 0) {
		return 0, false
	}
	r := sab / math.Sqrt(saa*sbb)
	return r, r >= cycleTwoDays
}

// lineResid stores in d the values of y less their least-squares line
// over the positions where both y and other hold a value, and 0 elsewhere.
// It reports false when fewer than three quarters of the positions count.
func lineResid(y, other, d []float64) bool {
	var n, sx, sy, sxx, sxy float64
	for i, v := range y {
		if v == v && other[i] == other[i] {
			x := float64(i)
			n++
			sx += x
			sy += v
			sxx += x * x
			sxy += x * v
		}
	}
	if 4*n < 3*float64(len(y)) {
		return false
	}
	den := n*sxx - sx*sx
	if !(den > 0) {
		return false
	}
	b := (n*sxy - sx*sy) / den
	a := (sy - b*sx) / n
	for i, v := range y {
		d[i] = 0
		if v == v && other[i] == other[i] {
			d[i] = v - a - b*float64(i)
		}
	}
	return true
}

// detectLevel runs detect on one level for periods from..to and returns
// c with what it found, or c unchanged when it found nothing.
func (cs *cycleScratch) detectLevel(lv *state.LevelView, from, to time.Duration, c Cycles) Cycles {
	w := time.Duration(lv.Width) * time.Millisecond
	if w <= 0 {
		return c
	}
	lo := int(max((from+w-1)/w, 2))
	hi := int(min(to/w, math.MaxInt32))
	p, p2, r := cs.detect(lv.Y, lo, hi)
	if p > 0 {
		p, r = cs.snap(lv.Y, p, r, w, lo, hi)
	}
	if p > 0 {
		c.Period, c.ACF = time.Duration(p)*w, r
		c.Period2 = time.Duration(p2) * w
	}
	return c
}

// smoothOut returns y less its centred moving average over window points
// (2×window with half-weight ends for an even window, as classical
// decomposition does), NaN where the window does not fit or holds fewer
// than half its values. Whatever is slower than the window goes: a
// trend, a weekend's lower level, a level shift; a cycle of the window's
// length or shorter stays.
func (cs *cycleScratch) smoothOut(y []float64, window int) []float64 {
	n := len(y)
	cs.ma = grow(cs.ma, n)
	out := cs.ma
	h := window / 2
	for t := range n {
		out[t] = math.NaN()
		if t < h || t+h >= n || y[t] != y[t] {
			continue
		}
		s, w := 0.0, 0.0
		for j := t - h; j <= t+h; j++ {
			if v := y[j]; v == v {
				f := 1.0
				if window%2 == 0 && (j == t-h || j == t+h) {
					f = 0.5
				}
				s += f * v
				w += f
			}
		}
		if w >= float64(window)/2 {
			out[t] = y[t] - s/w
		}
	}
	return out
}

// calendar lists the periods machine metrics cycle with far more often
// than any other (common practice: jobs run hourly, shifts and backups
// daily, traffic follows the day and the week).
var calendar = [...]time.Duration{
	time.Hour, 2 * time.Hour, 3 * time.Hour, 4 * time.Hour, 6 * time.Hour, 8 * time.Hour,
	12 * time.Hour, 24 * time.Hour, 7 * 24 * time.Hour,
}

// onCalendar reports whether p is one of the calendar periods.
func onCalendar(p time.Duration) bool {
	for _, c := range calendar {
		if p == c {
			return true
		}
	}
	return false
}

// snap moves a period of p lags of width w, found with autocorrelation r,
// to a calendar period within a twelfth of it whose own autocorrelation
// (bias-corrected) is within cycleMargin of the period's: with a few
// cycles of history, noise moves a flat peak by a lag or two, and a
// profile a lag off misaligns with every cycle it is built from. It reads
// the autocorrelation detect left in cs.r.
func (cs *cycleScratch) snap(y []float64, p int, r float64, w time.Duration, lo, hi int) (int, float64) {
	y, _ = trimNaN(y)
	nf := float64(len(y))
	adj := func(k int) float64 { return cs.r[k] * nf / (nf - float64(k)) }
	if p >= len(cs.r) {
		return p, r
	}
	at := time.Duration(p) * w
	for _, c := range calendar {
		if c == at || c%w != 0 || absDur(c-at)*12 > at {
			continue
		}
		k := int(c / w)
		if k < lo || k > hi || k >= len(cs.r) || float64(k) >= nf {
			continue
		}
		if adj(k) >= adj(p)-cycleMargin {
			return k, cs.r[k]
		}
	}
	return p, r
}

// cycleLevels returns the index of the coarsest level and of the next
// finer one, -1 for each that is missing.
func cycleLevels(v *state.View) (long, short int) {
	long, short = -1, -1
	for i := range v.Levels {
		w := v.Levels[i].Width
		if w <= 0 {
			continue
		}
		switch {
		case long < 0 || w > v.Levels[long].Width:
			long, short = i, long
		case w < v.Levels[long].Width && (short < 0 || w > v.Levels[short].Width):
			short = i
		}
	}
	return long, short
}

// levelEnd is the end of a level's newest bucket, unix ms.
func levelEnd(lv *state.LevelView) int64 {
	return lv.Start + int64(len(lv.Y))*lv.Width
}

// cyclesAt is what Cycles.At would be for v: the end of the coarsest
// level's newest bucket, 0 without levels.
func cyclesAt(v *state.View) int64 {
	long, _ := cycleLevels(v)
	if long < 0 {
		return 0
	}
	return levelEnd(&v.Levels[long])
}

// trimNaN returns the part of y from its first to its last value, and
// where it starts.
func trimNaN(y []float64) ([]float64, int) {
	i, j := 0, len(y)
	for i < j && y[i] != y[i] {
		i++
	}
	for j > i && y[j-1] != y[j-1] {
		j--
	}
	return y[i:j], i
}

// detect looks for a cycle in the uniform series y (NaN for gaps) with a
// period of lo to hi steps, and for a second, longer one at a multiple of
// it. It returns the periods in steps (0 when none) and the
// autocorrelation at the first.
//
// The series is first detrended by a robust straight line (the median of
// the slopes between points half the series apart, then the median
// intercept) and winsorized. Differencing, the other usual way to remove
// a trend, multiplies the spectrum by 4·sin²(π/period), which for a daily
// cycle in hourly buckets is 0.07 against up to 4 for noise: a smooth cycle
// of the size of the noise would vanish. A line keeps the cycle whole; what
// it leaves of a wandering level or a level shift is a slowly decaying
// autocorrelation, which the tests below refuse.
//
// A lag k is a candidate period when r_k is a local maximum of the
// autocorrelation, clears the Bartlett band cycleZ·se_k or cycleSure
// (the band widens with every large r_j at shorter lags, as those of a
// random walk or a step are), reaches cycleFloor after the bias correction n/(n−k), and
// rises cycleRise above the lowest r_j at a shorter lag; when twice the
// lag is in reach, the autocorrelation there must be at least half the
// floor as well. The period is the
// first candidate within cycleStrong of the best, moved by at most a
// twenty-fourth of itself to the lag whose multiples have the highest mean
// autocorrelation (noise shifts a flat peak by a lag or two; the
// multiples of the true period keep lining up). The second period is the
// multiple of the first whose corrected autocorrelation stands cycleMargin
// above those of the neighbouring multiples and is no more than
// cycleMargin below the first's.
func (cs *cycleScratch) detect(y []float64, lo, hi int) (p, p2 int, acf float64) {
	y, _ = trimNaN(y)
	n := len(y)
	lo = max(lo, 2)
	hi = min(hi, n/2)
	if hi < lo {
		return 0, 0, 0
	}
	nv := 0
	for _, v := range y {
		if v == v {
			nv++
		}
	}
	if nv < max(n/2, 2*lo, 8) {
		return 0, 0, 0
	}
	d, ok := cs.detrend(y)
	if !ok {
		return 0, 0, 0
	}
	L := min(n-2, hi+hi/4+1)
	cs.r = grow(cs.r, L+1)
	den := 0.0
	for _, v := range d {
		den += v * v
	}
	lagSums(d, den, cs.r)
	r := cs.r
	cs.se = bartlett(r, nv, cs.se)
	se := cs.se
	nf := float64(n)
	adj := func(k int) float64 { return r[k] * nf / (nf - float64(k)) }

	// Two passes over the candidates: the best, then the first strong one.
	best := math.Inf(-1)
	for pass := 0; pass < 2 && p == 0; pass++ {
		low := r[1]
		for k := 2; k <= hi && k+1 <= L; k++ {
			low = min(low, r[k-1])
			if k < lo || !(r[k] > r[k-1] && r[k] >= r[k+1]) {
				continue
			}
			a := adj(k)
			// Once slow patterns are taken out by a moving average, a
			// swing of twice cycleRise from a trough to a peak this high
			// is a cycle whatever the band says; noise moves the
			// autocorrelation by about 1/√n. (With only a line taken out,
			// a level shift swings the autocorrelation too.)
			swing := cs.window > 1 && r[k]-low >= 2*cycleRise && r[k] >= cycleSwing
			if r[k] < min(cycleZ*se[k], cycleSure) && !swing || a < cycleFloor || r[k]-low < cycleRise {
				continue
			}
			if 2*k+1 <= L && max(adj(2*k-1), adj(2*k), adj(2*k+1)) < cycleFloor/2 {
				continue // a cycle repeats: the autocorrelation does too
			}
			if pass == 0 {
				best = max(best, a)
			} else if a >= cycleStrong*best {
				p = k
				break
			}
		}
		if math.IsInf(best, -1) {
			return 0, 0, 0
		}
	}
	if p == 0 {
		return 0, 0, 0
	}

	// Refine on the multiples.
	// Each multiple weighs by the pairs behind it: the bias correction
	// of a far lag amplifies its noise as much as its value.
	score := func(k int) float64 {
		s, m := 0.0, 0.0
		for j := k; j <= L; j += k {
			w := nf - float64(j)
			s += adj(j) * w
			m += w
		}
		return s / m
	}
	refine := func(p int) (int, float64) {
		w := max(2, p/12)
		if 2*(p+w) > L {
			// Some neighbours would rest on one lag, others on two:
			// their scores do not compare. The local maximum stands.
			return p, score(p)
		}
		bp, bs := p, score(p)
		for k := max(p-w, lo); k <= min(p+w, hi); k++ {
			if s := score(k); s > bs {
				bp, bs = k, s
			}
		}
		return bp, bs
	}
	p, ps := refine(p)
	// A weak cycle can miss its first peak and be found at a multiple; a
	// fraction of the period whose multiples line up as well is the period.
	for d := 4; d >= 2; d-- {
		if q := (p + d/2) / d; q >= lo {
			if q, qs := refine(q); qs >= ps-cycleMargin && adj(q) >= cycleFloor && r[q] >= cycleZ*se[q] {
				p = q
				break
			}
		}
	}
	acf = r[p]

	// A second period at a multiple. Two autocorrelations of a series
	// with correlation ρ at the period, each from about n−q pairs, differ
	// by sampling alone with a spread of about √(2/(n−q))·(1−ρ²); the
	// margin over the neighbours is cycleZ of those, at least cycleMargin.
	// The next multiple up is compared only when it is within half the
	// series; beyond, it rests on too few pairs to say anything.
	top := math.Inf(-1)
	rho := min(max(adj(p), 0), 1)
	for q := 2 * p; q <= hi; q += p {
		a := adj(q)
		margin := max(cycleMargin, cycleZ*math.Sqrt(2/(nf-float64(q)))*(1-rho*rho))
		if a < adj(p)-cycleMargin || a < adj(q-p)+margin {
			continue
		}
		if q+p <= hi && a < adj(q+p)+margin {
			continue
		}
		// The levels of the cycles must differ by position (the 0.1 %
		// point of the test: the autocorrelation has already picked the
		// multiple where they differ most, so the usual points are too
		// lenient).
		if a > top && cycleF(y, d, p, q/p) > 3.09 {
			top, p2 = a, q
		}
	}
	return p, p2, acf
}

// cycleF tests whether the mean levels of the whole cycles of p steps in
// d differ by their position in a group of m (the day of the week for
// days): the F statistic of a one-way analysis of variance of the cycle
// levels by position, turned into a standard normal deviate by Paulson's
// approximation to the F distribution (0 when it cannot be computed). Level differences between
// single cycles (a busy Tuesday) raise the autocorrelation at some
// multiples of p by chance; they do not repeat by position. y marks the
// gaps of d.
func cycleF(y, d []float64, p, m int) float64 {
	var sum [64]float64
	var cnt [64]int
	if m > len(sum) || m < 2 {
		return 0
	}
	var all, all2 float64
	N := 0
	for c := 0; (c+1)*p <= len(d); c++ {
		s, k := 0.0, 0
		for t := c * p; t < (c+1)*p; t++ {
			if y[t] == y[t] {
				s += d[t]
				k++
			}
		}
		if 2*k < p {
			continue
		}
		l := s / float64(k)
		sum[c%m] += l
		cnt[c%m]++
		all += l
		all2 += l * l
		N++
	}
	groups := 0
	ssb := 0.0
	for g := range m {
		if cnt[g] > 0 {
			ssb += sum[g] * sum[g] / float64(cnt[g])
			groups++
		}
	}
	d1, d2 := float64(groups-1), float64(N-groups)
	if groups < m || d2 < 2 {
		return 0
	}
	ssb -= all * all / float64(N)
	ssw := all2 - all*all/float64(N) - ssb
	if !(ssw > 0) {
		if ssb > 0 {
			return math.Inf(1)
		}
		return 0
	}
	F := (ssb / d1) / (ssw / d2)
	// Paulson: with a = 2/(9·d1), b = 2/(9·d2), the statistic
	// ((1−b)·F^⅓ − (1−a)) / √(a + b·F^⅔) is nearly standard normal.
	a, b := 2/(9*d1), 2/(9*d2)
	f3 := math.Cbrt(F)
	z := ((1-b)*f3 - (1 - a)) / math.Sqrt(a+b*f3*f3)
	return z
}

// detrend stores in cs.d the series y less a robust straight line,
// winsorized at cycleClip robust standard deviations and centred, with
// zeros in the gaps. It reports false when nothing is left: a constant
// series or an exact line.
func (cs *cycleScratch) detrend(y []float64) ([]float64, bool) {
	if cs.window > 1 {
		y = cs.smoothOut(y, cs.window)
	}
	n := len(y)
	cs.d = grow(cs.d, n)
	cs.tmp = grow(cs.tmp, n)
	d, tmp := cs.d, cs.tmp
	h := n / 2
	m := 0
	for i := 0; i+h < n; i++ {
		if a, b := y[i], y[i+h]; a == a && b == b {
			tmp[m] = (b - a) / float64(h)
			m++
		}
	}
	b := 0.0
	if m > 0 {
		b = median(tmp[:m])
	}
	m = 0
	size := 0.0
	for i, v := range y {
		if v == v {
			tmp[m] = v - b*float64(i)
			m++
			size = max(size, math.Abs(v))
		}
	}
	a := median(tmp[:m])
	m = 0
	for i, v := range y {
		if v == v {
			d[i] = v - a - b*float64(i)
			tmp[m] = math.Abs(d[i])
			m++
		} else {
			d[i] = math.NaN()
		}
	}
	s := 1.4826 * median(tmp[:m])
	if !(s > 1e-9*size) {
		// More than half the values on the line: a flat series with a few
		// departures. Scale by the mean deviation instead.
		s = 0
		for _, v := range tmp[:m] {
			s += v
		}
		s = s / float64(m) * math.Sqrt(math.Pi/2)
	}
	if !(s > 1e-9*size) || math.IsInf(s, 0) {
		return nil, false
	}
	lim := cycleClip * s
	sum := 0.0
	for i, v := range d {
		if v == v {
			v = min(max(v, -lim), lim)
			d[i] = v
			sum += v
		}
	}
	mean := sum / float64(m)
	for i, v := range d {
		if v == v {
			d[i] = v - mean
		} else {
			d[i] = 0
		}
	}
	return d, true
}
