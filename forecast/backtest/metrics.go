package backtest

import (
	"math"
	"slices"
)

// winkler is the interval score of the central (1−alpha) interval [lo, hi]
// for the outcome y: its width plus 2/alpha times the distance by which y
// falls outside (Winkler 1972; Gneiting & Raftery 2007, eq. 43).
func winkler(lo, hi, y, alpha float64) float64 {
	s := hi - lo
	if y < lo {
		s += 2 / alpha * (lo - y)
	}
	if y > hi {
		s += 2 / alpha * (y - hi)
	}
	return s
}

// naiveScale is the in-sample mean absolute error of the one-step naive
// forecast, (1/(n−1)) Σ |y_i − y_{i−1}|, over the points before until
// (Hyndman & Koehler 2006, the MASE denominator); the whole series when
// fewer than two points lie before until.
func naiveScale(tl *timeline, until int64) float64 {
	n := tl.search(until)
	if n < 2 {
		n = len(tl.v)
	}
	if n < 2 {
		return 0
	}
	s := 0.0
	for i := 1; i < n; i++ {
		s += math.Abs(tl.v[i] - tl.v[i-1])
	}
	return s / float64(n-1)
}

// weightedGeoMean is exp(Σ w·log x / Σ w) over the finite positive x
// (common-practice weighted geometric mean). NaN when nothing qualifies.
func weightedGeoMean(x, w []float64) float64 {
	var s, ws float64
	for i := range x {
		if !(x[i] > 0) || math.IsInf(x[i], 0) || !(w[i] > 0) {
			continue
		}
		s += w[i] * math.Log(x[i])
		ws += w[i]
	}
	if ws == 0 {
		return math.NaN()
	}
	return math.Exp(s / ws)
}

// quantile is the q-quantile of xs by linear interpolation between order
// statistics (Hyndman & Fan 1996, type 7, the common default); NaN for
// none. xs is sorted in place.
func quantile(xs []float64, q float64) float64 {
	if len(xs) == 0 {
		return math.NaN()
	}
	slices.Sort(xs)
	h := q * float64(len(xs)-1)
	i := int(math.Floor(h))
	if i >= len(xs)-1 {
		return xs[len(xs)-1]
	}
	return xs[i] + (h-float64(i))*(xs[i+1]-xs[i])
}
