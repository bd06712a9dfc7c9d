package forecast

import "slices"

// selectK reorders a so that a[k] is the value a sorted a would hold there,
// with no larger value before it and no smaller one after it, and returns it.
// Quickselect with a median-of-three pivot: O(len(a)) on average; after too
// many rounds it sorts what is left, which bounds the worst case.
func selectK(a []float64, k int) float64 {
	lo, hi := 0, len(a)-1
	for rounds := 0; hi > lo; rounds++ {
		if rounds > 64 {
			slices.Sort(a[lo : hi+1])
			return a[k]
		}
		mid := lo + (hi-lo)/2
		if a[mid] < a[lo] {
			a[mid], a[lo] = a[lo], a[mid]
		}
		if a[hi] < a[lo] {
			a[hi], a[lo] = a[lo], a[hi]
		}
		if a[hi] < a[mid] {
			a[hi], a[mid] = a[mid], a[hi]
		}
		p := a[mid]
		i, j := lo, hi
		for i <= j {
			for a[i] < p {
				i++
			}
			for a[j] > p {
				j--
			}
			if i <= j {
				a[i], a[j] = a[j], a[i]
				i++
				j--
			}
		}
		switch {
		case k <= j:
			hi = j
		case k >= i:
			lo = i
		default:
			return a[k]
		}
	}
	return a[k]
}

// median returns the upper median of a, reordering a; 0 when a is empty.
func median(a []float64) float64 {
	if len(a) == 0 {
		return 0
	}
	return selectK(a, len(a)/2)
}

// median5 is the median of five values by a network of seven
// compare-exchanges (N. Devillard, "Fast median search: an ANSI C
// implementation", 1998, opt_med5).
func median5(p0, p1, p2, p3, p4 float64) float64 {
	if p0 > p1 {
		p0, p1 = p1, p0
	}
	if p3 > p4 {
		p3, p4 = p4, p3
	}
	if p0 > p3 {
		p0, p3 = p3, p0 // p0 is now below three others: not the median
	}
	if p1 > p4 {
		p1, p4 = p4, p1 // p4 is now above three others: not the median
	}
	if p1 > p2 {
		p1, p2 = p2, p1
	}
	if p2 > p3 {
		p2, p3 = p3, p2
	}
	if p1 > p2 {
		p1, p2 = p2, p1
	}
	_, _, _ = p0, p3, p4
	return p2
}
