package forecast

import (
	"math"

	"github.com/headroom-dev/headroom/state"
)

// maxGroups bounds the distinct bucket widths told apart; a view from the
// store has one per level.
const maxGroups = 8

// minDiffs is the fewest same-resolution differences that estimate the
// noise of a resolution on their own; thinner groups borrow it from the
// best-supported group as white noise would scale.
const minDiffs = 10

// maxRho caps the estimated serial correlation of the noise: beyond it the
// estimate cannot tell one value from another, and the inflation
// (1+ρ)/(1−ρ), here 19, says little more.
const maxRho = 0.9

// varFloor keeps standardized variances, and so weights, finite for series
// without noise: a noise of 1e-10 of their range.
const varFloor = 1e-20

// load copies the usable points of v into sc: finite, positive weight,
// non-empty, strictly increasing in time. It returns their number.
func (sc *Scratch) load(v *state.View) int {
	nv := min(len(v.T), len(v.Y), len(v.W))
	sc.reset(nv)
	sc.ng = 0
	sc.pts, sc.cnt = [maxGroups]float64{}, [maxGroups]float64{}
	k := 0
	last := math.Inf(-1)
	for i := 0; i < nv; i++ {
		t, y, w := v.T[i], v.Y[i], v.W[i]
		// x-x == 0 is false exactly for NaN and ±Inf.
		if !(t > last && t-t == 0 && y-y == 0 && w > 0 && w-w == 0) {
			continue
		}
		if i < len(v.N) && v.N[i] == 0 {
			continue
		}
		last = t
		sc.x[k] = t / 3600
		sc.y[k] = y
		g := sc.group(w)
		sc.grp[k] = g
		if i < len(v.N) {
			sc.pts[g] += float64(v.N[i])
		} else {
			sc.pts[g] += w // no counts: as if points came at a steady rate
		}
		sc.cnt[g]++
		k++
	}
	return k
}

// points is the mean number of raw points in a bucket of group g: what
// the variance of a bucket mean scales with. A series sampled every five
// minutes has one point in each non-empty one-minute bucket and twelve in
// an hourly one, not sixty.
func (sc *Scratch) points(g int) float64 {
	if sc.cnt[g] > 0 && sc.pts[g] > 0 {
		return sc.pts[g] / sc.cnt[g]
	}
	return sc.width[g]
}

// group returns the resolution group of a bucket width, adding one when
// there is room and otherwise taking the nearest width.
func (sc *Scratch) group(w float64) uint8 {
	for g := 0; g < sc.ng; g++ {
		if sc.width[g] == w {
			return uint8(g)
		}
	}
	if sc.ng < maxGroups {
		sc.width[sc.ng] = w
		sc.ng++
		return uint8(sc.ng - 1)
	}
	best, bd := 0, math.Inf(1)
	for g := 0; g < sc.ng; g++ {
		if d := math.Abs(math.Log(w / sc.width[g])); d < bd {
			best, bd = g, d
		}
	}
	return uint8(best)
}

// standardize estimates the noise of each resolution, rescales the values
// to the noise of the newest resolution around the newest value, removes a
// robust overall trend (which changes no straight-line fit, only keeps the
// numbers small), and sets the weights.
func (sc *Scratch) standardize(n int) {
	x, y, grp, buf := sc.x[:n], sc.y[:n], sc.grp[:n], sc.buf[:n]
	// Noise of each group from second differences of neighbouring points
	// of the group, y[t]−2y[t−1]+y[t−2]: they cancel any level and any
	// trend, also one that changes between the group's oldest and newest
	// points, which first differences would take for noise.
	var sd [maxGroups]float64
	var cnt [maxGroups]int
	off := sc.groupDiffs(n, 1, &cnt)
	for g := 0; g < sc.ng; g++ {
		if cnt[g] >= minDiffs {
			sd[g] = diffScale(buf[off[g]:off[g]+cnt[g]]) / math.Sqrt(6)
		}
	}
	sc.kappa = sc.autocorrelation(n, &sd)
	// The variance of one raw point, from the best-supported group (white
	// noise in a bucket mean scales as 1/points); used for groups too thin
	// to tell.
	ref := -1
	for g := 0; g < sc.ng; g++ {
		if cnt[g] >= minDiffs && sd[g] > 0 && (ref < 0 || cnt[g] > cnt[ref]) {
			ref = g
		}
	}
	var unit float64
	if ref >= 0 {
		unit = sd[ref] * sd[ref] * sc.points(ref)
	} else {
		for i := 1; i < n; i++ {
			wi, wj := sc.points(int(grp[i])), sc.points(int(grp[i-1]))
			buf[i-1] = (y[i] - y[i-1]) / math.Sqrt(1/wi+1/wj)
		}
		s := diffScale(buf[:n-1])
		unit = s * s
	}
	for g := 0; g < sc.ng; g++ {
		if cnt[g] < minDiffs || sd[g] == 0 {
			sd[g] = math.Sqrt(unit / sc.points(g))
		}
	}

	sc.ref = y[n-1]
	scale := sd[grp[n-1]]
	if !(scale > 0) || math.IsInf(scale, 0) {
		lo, hi := y[0], y[0]
		for _, v := range y {
			lo, hi = min(lo, v), max(hi, v)
		}
		scale = hi - lo
		if !(scale > 0) || math.IsInf(scale, 0) {
			scale = max(math.Abs(sc.ref), 1) * 1e-9
		}
	}
	sc.scale = scale
	for g := 0; g < sc.ng; g++ {
		v := sd[g] / scale
		sc.vg[g] = max(v*v, varFloor)
	}
	sc.vnew = sc.vg[grp[n-1]]
	for i := range y {
		y[i] = (y[i] - sc.ref) / scale
	}
	sc.trend = pairSlope(x, y, buf)
	var om, som [maxGroups]float64
	for g := 0; g < sc.ng; g++ {
		om[g], som[g] = 1/sc.vg[g], 1/math.Sqrt(sc.vg[g])
	}
	for i := range y {
		y[i] -= sc.trend * x[i]
		sc.om[i], sc.som[i] = om[grp[i]], som[grp[i]]
	}
}

// diffScale is a robust and efficient standard deviation of d: a first
// scale from the median absolute deviation
// (or, when more than half of d is equal, as with quantized values, from the
// mean absolute deviation), then the root mean square of the deviations
// winsorized at three times that scale, made consistent for normal data.
// It reorders d.
func diffScale(d []float64) float64 {
	if len(d) == 0 {
		return 0
	}
	med := median(d)
	sum := 0.0
	for i, v := range d {
		d[i] = math.Abs(v - med)
		sum += d[i]
	}
	s := 1.4826 * median(d)
	if !(s > 0) {
		return sum / float64(len(d)) * math.Sqrt(math.Pi/2)
	}
	lim := winsorAt * s
	ss := 0.0
	for _, a := range d {
		a = min(a, lim)
		ss += a * a
	}
	return math.Sqrt(ss / float64(len(d)) / winsorMoment(winsorAt))
}

// groupDiffs lays out in buf, group by group, the second differences at
// lag k, y[t]−2y[t−k]+y[t−2k], over runs of 2k+1 neighbouring points of one
// group (a counting sort: two passes whatever the groups). It returns where
// each group's differences start and sets cnt to their number.
func (sc *Scratch) groupDiffs(n, k int, cnt *[maxGroups]int) (off [maxGroups]int) {
	y, grp, buf := sc.y[:n], sc.grp[:n], sc.buf[:n]
	*cnt = [maxGroups]int{}
	run := 1 // length of the run of one group ending at i
	for i := 1; i < n; i++ {
		if grp[i] == grp[i-1] {
			run++
		} else {
			run = 1
		}
		if run > 2*k {
			cnt[grp[i]]++
		}
	}
	for g := 1; g < sc.ng; g++ {
		off[g] = off[g-1] + cnt[g-1]
	}
	pos := off
	run = 1
	for i := 1; i < n; i++ {
		if grp[i] == grp[i-1] {
			run++
		} else {
			run = 1
		}
		if run > 2*k {
			g := grp[i]
			buf[pos[g]] = y[i] - 2*y[i-k] + y[i-2*k]
			pos[g]++
		}
	}
	return off
}

// autocorrelation estimates how much serial correlation of the noise of
// the newest group inflates the evidence for a change near the end of the
// history, where the current regime is decided. For AR(1) noise with
// lag-one correlation ρ, the second differences at lag two and at lag one
// have variances in the ratio R(ρ) = (1+ρ)/(3−ρ)·(3−ρ²), which rises from 1
// (white noise) to 2; like sd, both cancel levels and trends, and both are
// the robust variances of diffScale, so a spike, a ramp or a level shift
// does not pass for correlation. The inflation is the long-run variance
// ratio (1+ρ)/(1−ρ).
func (sc *Scratch) autocorrelation(n int, sd *[maxGroups]float64) float64 {
	var cnt [maxGroups]int
	off := sc.groupDiffs(n, 2, &cnt)
	g := sc.grp[n-1]
	if cnt[g] < minDiffs || !(sd[g] > 0) {
		return 1
	}
	s2 := diffScale(sc.buf[off[g] : off[g]+cnt[g]])
	r := s2 * s2 / (6 * sd[g] * sd[g])
	if !(r > 1) {
		return 1
	}
	// R is increasing: bisect for ρ.
	lo, hi := 0.0, maxRho
	for range 30 {
		mid := (lo + hi) / 2
		if (1+mid)*(3-mid*mid)/(3-mid) < r {
			lo = mid
		} else {
			hi = mid
		}
	}
	rho := (lo + hi) / 2
	return (1 + rho) / (1 - rho)
}

// clip fills yc with each value clipped to four standard deviations of its
// group around the median of the five nearest points, so that one or two
// outlying buckets cannot carry a changepoint while three or more at the
// end, a possible new level, pass through.
func (sc *Scratch) clip(n int) {
	y, yc := sc.y[:n], sc.yc[:n]
	var lim [maxGroups]float64
	for g := 0; g < sc.ng; g++ {
		lim[g] = 4 * math.Sqrt(sc.vg[g])
	}
	for i, v := range y {
		j := min(max(i-2, 0), n-5)
		med := median5(y[j], y[j+1], y[j+2], y[j+3], y[j+4])
		l := lim[sc.grp[i]]
		if v > med+l {
			v = med + l
		} else if v < med-l {
			v = med - l
		}
		yc[i] = v
	}
}

// pairSlope is a robust slope in O(n): the median of the slopes between
// each point and the point half the sample later. 0 when there are none.
func pairSlope(x, y, buf []float64) float64 {
	n := len(x)
	h := n / 2
	m := 0
	for i := 0; i+h < n; i++ {
		if dx := x[i+h] - x[i]; dx > 0 {
			buf[m] = (y[i+h] - y[i]) / dx
			m++
		}
	}
	if m == 0 {
		return 0
	}
	return median(buf[:m])
}
