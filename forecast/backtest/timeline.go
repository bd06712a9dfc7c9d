package backtest

import (
	"cmp"
	"slices"
)

// timeline is a series' points sorted by time (stable, so duplicates keep
// file order), for looking up actuals and history windows.
type timeline struct {
	t []int64
	v []float64
}

func newTimeline(ts []int64, vs []float64) timeline {
	n := min(len(ts), len(vs))
	idx := make([]int, n)
	for i := range idx {
		idx[i] = i
	}
	slices.SortStableFunc(idx, func(a, b int) int { return cmp.Compare(ts[a], ts[b]) })
	tl := timeline{t: make([]int64, n), v: make([]float64, n)}
	for i, j := range idx {
		tl.t[i], tl.v[i] = ts[j], vs[j]
	}
	return tl
}

// search returns the first index with t ≥ at.
func (tl *timeline) search(at int64) int {
	i, _ := slices.BinarySearch(tl.t, at) // the first of equal times
	return i
}

// nearest returns the value of the point nearest to at within tol ms (the
// earlier one on a tie), restricted to indices [lo, hi).
func (tl *timeline) nearest(at, tol int64, lo, hi int) (float64, bool) {
	i := tl.search(at)
	best, bd := -1, tol+1
	for _, j := range []int{i - 1, i} {
		if j < lo || j >= hi {
			continue
		}
		d := tl.t[j] - at
		if d < 0 {
			d = -d
		}
		if d < bd {
			best, bd = j, d
		}
	}
	if best < 0 {
		return 0, false
	}
	return tl.v[best], true
}
