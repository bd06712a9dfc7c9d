package forecast

import (
	"math"
	"math/rand/v2"
	"slices"
)

// This file holds two robust straight-line estimators as reference methods
// for the evaluation baselines: Theil–Sen (Theil 1950, Sen 1968), the
// median of the slopes between all pairs of points, and Siegel's repeated
// medians (Siegel 1982). Medians of an even count are the mean of the two
// middle values, the usual convention.

// maxStoredSlopes bounds the pairwise slopes TheilSen holds in memory at
// once (32 MiB, about 2900 points); beyond it order statistics are found by
// repeated passes over the pairs that hold only a sample and the slopes
// near the sought rank.
const maxStoredSlopes = 1 << 22

// TheilSen returns the Theil–Sen line through (x, y): the slope is the
// median of the slopes (y_j − y_i)/(x_j − x_i) over all pairs with
// x_i ≠ x_j, the intercept median(y) − slope·median(x). It returns NaN for
// fewer than two points, lengths that differ, values that are not finite
// or differences that overflow, and when all x are equal. Time
// O(n²) on average; memory O(n²) up to about 2900 points and O(n) beyond.
func TheilSen(x, y []float64) (slope, intercept float64) {
	ps, ok := newPairSlopes(x, y)
	if !ok || ps.count == 0 {
		return math.NaN(), math.NaN()
	}
	n := ps.count
	if n%2 == 1 {
		slope = ps.orderStats(n / 2)[0]
	} else {
		s := ps.orderStats(n/2-1, n/2)
		slope = (s[0] + s[1]) / 2
	}
	mx := tsMedian(slices.Clone(x))
	my := tsMedian(slices.Clone(y))
	return slope, my - float64(slope*mx)
}

// TheilSenInterval is the confidence interval at level conf (0.95 for
// 95 %) of the Theil–Sen slope by Sen's (1968, eq. 2.6) rank rule: with N
// pairwise slopes sorted and σ² = (n(n−1)(2n+5) − Σ t(t−1)(2t+5))/18, the
// sum running over the groups of t > 1 tied values of x and of y, the
// bounds are the slopes at the 0-based ranks round((N + zσ)/2) − 1 and
// round((N − zσ)/2), z = Φ⁻¹((1 − conf)/2), rounded half to even and kept
// within the N slopes. It returns NaN where TheilSen does and for conf
// outside (0, 1).
func TheilSenInterval(x, y []float64, conf float64) (lo, hi float64) {
	nan := math.NaN()
	if !(conf > 0 && conf < 1) {
		return nan, nan
	}
	ps, ok := newPairSlopes(x, y)
	if !ok || ps.count == 0 {
		return nan, nan
	}
	n := float64(len(x))
	sig2 := n*(n-1)*(2*n+5) - senTieTerm(x) - senTieTerm(y)
	sig2 *= 1.0 / 18
	if !(sig2 >= 0) {
		return nan, nan
	}
	z := normQuantile((1 - conf) / 2)
	sigma := math.Sqrt(sig2)
	N := float64(ps.count)
	rl := max(int64(math.RoundToEven((N+z*sigma)/2))-1, 0)
	ru := min(int64(math.RoundToEven((N-z*sigma)/2)), ps.count-1)
	rl = min(rl, ru)
	s := ps.orderStats(rl, ru)
	return s[0], s[1]
}

// senTieTerm is Σ t(t−1)(2t+5) over the groups of t > 1 equal values of a.
func senTieTerm(a []float64) float64 {
	s := slices.Clone(a)
	slices.Sort(s)
	sum := 0.0
	for i := 0; i < len(s); {
		j := i + 1
		for j < len(s) && s[j] == s[i] {
			j++
		}
		if t := float64(j - i); t > 1 {
			sum += t * (t - 1) * (2*t + 5)
		}
		i = j
	}
	return sum
}

// Siegel returns Siegel's repeated-medians line through (x, y): for each
// point the median of its slopes to the points with a different x, the
// slope the median of those medians, and the intercept the median of
// y − slope·x (the hierarchical intercept). Points whose x all others
// share are left out of the outer median. It returns NaN for fewer than
// two points, lengths that differ, values that are not finite or
// differences that overflow, and when all x are equal. Time O(n²), memory
// O(n).
func Siegel(x, y []float64) (slope, intercept float64) {
	nan := math.NaN()
	if !slopeInput(x, y) {
		return nan, nan
	}
	n := len(x)
	row := make([]float64, 0, n-1)
	meds := make([]float64, 0, n)
	for j := range n {
		row = row[:0]
		for i := range n {
			if x[i] != x[j] {
				row = append(row, (y[j]-y[i])/(x[j]-x[i]))
			}
		}
		if len(row) > 0 {
			meds = append(meds, tsMedian(row))
		}
	}
	if len(meds) == 0 {
		return nan, nan
	}
	slope = tsMedian(meds)
	res := make([]float64, n)
	for i := range res {
		res[i] = y[i] - float64(slope*x[i])
	}
	return slope, tsMedian(res)
}

// tsMedian is the median of a, the mean of the two middle values for an
// even count; NaN when a is empty. It reorders a.
func tsMedian(a []float64) float64 {
	n := len(a)
	switch {
	case n == 0:
		return math.NaN()
	case n%2 == 1:
		return selectK(a, n/2)
	}
	lo := selectK(a, n/2-1)
	return (lo + slices.Min(a[n/2:])) / 2
}

// slopeInput reports whether x and y can give pairwise slopes: equal
// lengths of at least two, finite values, and differences that do not
// overflow (so that no slope is NaN).
func slopeInput(x, y []float64) bool {
	if len(x) != len(y) || len(x) < 2 {
		return false
	}
	for _, a := range [2][]float64{x, y} {
		lo, hi := a[0], a[0]
		for _, v := range a {
			lo, hi = min(lo, v), max(hi, v)
		}
		// NaN propagates through min and max; hi−lo is also not finite
		// for infinite values and for a range that overflows.
		if d := hi - lo; math.IsNaN(d) || math.IsInf(d, 0) {
			return false
		}
	}
	return true
}

// pairSlopes finds order statistics of the pairwise slopes of (x, y).
type pairSlopes struct {
	x, y  []float64
	count int64 // pairs with x_i ≠ x_j
	limit int64 // slopes held in memory at most
}

func newPairSlopes(x, y []float64) (pairSlopes, bool) {
	if !slopeInput(x, y) {
		return pairSlopes{}, false
	}
	n := int64(len(x))
	count := n * (n - 1) / 2
	s := slices.Clone(x)
	slices.Sort(s)
	for i := 0; i < len(s); {
		j := i + 1
		for j < len(s) && s[j] == s[i] {
			j++
		}
		t := int64(j - i)
		count -= t * (t - 1) / 2
		i = j
	}
	return pairSlopes{x: x, y: y, count: count, limit: maxStoredSlopes}, true
}

// each calls f with every pairwise slope, in a fixed order.
func (ps *pairSlopes) each(f func(s float64)) {
	x, y := ps.x, ps.y
	for i := range x {
		xi, yi := x[i], y[i]
		for j := i + 1; j < len(x); j++ {
			if dx := x[j] - xi; dx != 0 {
				f((y[j] - yi) / dx)
			}
		}
	}
}

// orderStats returns the slopes at the given 0-based ranks of the sorted
// pairwise slopes; ranks must lie in [0, count).
func (ps *pairSlopes) orderStats(ranks ...int64) []float64 {
	out := make([]float64, len(ranks))
	if ps.count <= ps.limit {
		// The same slopes as each, without a call per slope.
		buf := make([]float64, 0, ps.count)
		x, y := ps.x, ps.y
		for i := range x {
			xi, yi := x[i], y[i]
			for j := i + 1; j < len(x); j++ {
				if dx := x[j] - xi; dx != 0 {
					buf = append(buf, (y[j]-yi)/dx)
				}
			}
		}
		for i, k := range ranks {
			out[i] = selectK(buf, int(k))
		}
		return out
	}
	for i, k := range ranks {
		out[i] = ps.stream(k)
	}
	return out
}

// stream finds the slope of rank k without holding all slopes: each pass
// over the pairs counts the slopes below and inside a trial bracket, keeps
// a uniform sample of the slopes still in question, and keeps those inside
// the bracket while they fit within limit. The sample places the next
// bracket around the sought rank, and a pass that finds the rank outside
// the bracket leaves only the few slopes beyond it in question. A few
// passes suffice.
func (ps *pairSlopes) stream(k int64) float64 {
	const m = 4096 // sample size
	rng := rand.New(rand.NewPCG(0x7e11, 0x5e4))
	outerLo, outerHi := math.Inf(-1), math.Inf(1) // the slope is in [outerLo, outerHi]
	below := int64(0)                             // slopes < outerLo
	cnt := ps.count                               // slopes in [outerLo, outerHi]
	lo, hi := outerLo, outerHi                    // trial bracket, inside the outer one
	sample := make([]float64, 0, m)
	keep := make([]float64, 0, min(ps.limit, cnt))
	for range 64 {
		sample, keep = sample[:0], keep[:0]
		var seen, a, b int64 // in the outer bracket; below lo; in [lo, hi]
		over := false
		ps.each(func(s float64) {
			if s < outerLo || s > outerHi {
				return
			}
			seen++
			if len(sample) < m {
				sample = append(sample, s)
			} else if r := rng.Int64N(seen); r < m {
				sample[r] = s
			}
			switch {
			case s < lo:
				a++
			case s <= hi:
				b++
				if int64(len(keep)) < ps.limit {
					keep = append(keep, s)
				} else {
					over = true
				}
			}
		})
		r := k - below
		switch {
		case r < a:
			outerHi, cnt = math.Nextafter(lo, math.Inf(-1)), a
		case r >= a+b:
			outerLo, below, cnt = math.Nextafter(hi, math.Inf(1)), below+a+b, seen-a-b
		default:
			if !over {
				return selectK(keep, int(r-a))
			}
			if lo == hi {
				return lo
			}
			outerLo, outerHi, below, cnt = lo, hi, below+a, b
		}
		// The sample of the slopes still in question places the next
		// bracket: their sample quantiles around the rank, widened by a
		// few standard errors of a sample quantile. When the pass saw no
		// more slopes than the sample holds, the sample is all of them.
		j := 0
		for _, s := range sample {
			if s >= outerLo && s <= outerHi {
				sample[j] = s
				j++
			}
		}
		sample = sample[:j]
		if seen <= m {
			return selectK(sample, int(k-below))
		}
		lo, hi = outerLo, outerHi
		if cnt <= ps.limit || len(sample) == 0 {
			continue
		}
		slices.Sort(sample)
		ms := float64(len(sample))
		q := (float64(k-below) + 0.5) / float64(cnt) * ms
		d := 2*math.Sqrt(ms) + 1
		lo = sample[max(int(math.Floor(q-d)), 0)]
		hi = sample[min(int(math.Ceil(q+d)), len(sample)-1)]
	}
	return math.NaN()
}
