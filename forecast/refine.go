package forecast

// This file refines an hourly seasonal profile with the shape the finer
// level shows within the hour.

import (
	"math"

	"github.com/headroom-dev/headroom/state"
)

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
