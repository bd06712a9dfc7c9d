package forecast

import "math"

// regime is where the current regime lies among the points: it starts at
// lo; the fit uses [lo, hi), points from hi on are a change too recent to
// form a regime; prev is where the previous regime started, -1 if lo is the
// first point.
type regime struct{ lo, hi, prev int }

// regime finds the current regime of the n points by binary segmentation
// toward the newest point: the best split of [lo, hi) into two lines is
// taken when it beats one line by the penalty, and the search repeats on
// what follows it. A best split that leaves fewer than m points after it is
// a change still in progress: those points are cut off (once) and the
// search goes on before them.
func (sc *Scratch) regime(n, m int, penalty float64) regime {
	r := regime{lo: 0, hi: n, prev: -1}
	// Serially correlated noise inflates the likelihood ratio by its
	// long-run variance ratio, so that wandering noise would pass for
	// changes; scale the penalty by it.
	penalty *= sc.kappa
	sc.suffix(0, n)
	cut := false
	for range 16 {
		minRight := m
		if !cut {
			minRight = 1
		}
		k := sc.split(r.lo, r.hi, m, minRight, penalty)
		if k < 0 {
			break
		}
		if r.hi-k >= m {
			r.prev, r.lo = r.lo, k
			continue
		}
		r.hi, cut = k, true
		sc.suffix(r.lo, r.hi)
	}
	return r
}

// suffix fills suf[k] with the moments of the clipped points [k, hi) for
// lo <= k <= hi. Summing from the end, rather than subtracting prefix sums,
// keeps short recent segments free of cancellation.
func (sc *Scratch) suffix(lo, hi int) {
	sc.suf[hi] = moments{}
	for k := hi - 1; k >= lo; k-- {
		s := sc.suf[k+1]
		s.add(sc.x[k], sc.yc[k], sc.om[k])
		sc.suf[k] = s
	}
}

// split returns the best split k of [lo, hi), with at least m points before
// it and minRight after it, when two lines beat one by the criterion
// N·log(RSS₀/RSS₁) > penalty·log(N) (the likelihood ratio of normal noise of
// unknown scale against a BIC-style penalty); -1 otherwise. suf must hold
// the suffix moments for hi. Each candidate costs O(1).
func (sc *Scratch) split(lo, hi, m, minRight int, penalty float64) int {
	N := hi - lo
	if N < m+minRight {
		return -1
	}
	x, y, om := sc.x, sc.yc, sc.om
	var left moments
	for i := lo; i < lo+m-1; i++ {
		left.add(x[i], y[i], om[i])
	}
	best, bk := math.Inf(1), -1
	for k := lo + m; k <= hi-minRight; k++ {
		left.add(x[k-1], y[k-1], om[k-1])
		if c := left.rss() + sc.suf[k].rss(); c < best {
			best, bk = c, k
		}
	}
	nf := float64(N)
	rss0 := sc.suf[lo].rss()
	// Weights make the noise of a point about 1: structure a thousand times
	// finer, or below the rounding of the sums, is not a change (a series
	// on an exact line must not split).
	floor := nf*1e-6 + 1e-12*sc.suf[lo].yy
	if bk < 0 || !(best+floor < (rss0+floor)*math.Exp(-penalty*math.Log(nf)/nf)) {
		return -1
	}
	return bk
}
