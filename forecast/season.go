package forecast

// This file estimates the seasonal profile the tide engine forecasts with.

import "math"

// trendClip winsorizes the values under the moving average of the profile
// at this many robust standard deviations of their distance to the plain
// average.
const trendClip = 3.0

// trendRounds bounds the rounds of winsorizing under the profile.
const trendRounds = 4

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
