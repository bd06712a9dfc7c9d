package state

import (
	"fmt"
	"math"
	"time"
)

// Event-time bucketing. Bucket numbers are absolute, floor(ts/width), so
// that every series agrees on bucket edges and the ring slot of bucket n is
// n mod Count. Each series moves on its own clock only: what closes when
// depends on that series' points alone, never on arrival order across
// series or on batching.

// reset makes the free slot in row the new series of k whose first point
// is at ts with value v. Clearing the block also has the memory of a new
// chunk faulted in when its series appear rather than at their first
// closing bucket.
func (c *chunk) reset(row int, k Key, ts int64, v float64) {
	lay := c.lay
	s := &c.series[row]
	first := floorDiv(ts-lay.late, lay.width[0])
	*s = Series{row: int32(row), live: true, ch: c, key: string(k.Text), born: first, incidents: s.incidents[:0]}
	c.hot[row] = hot{hash: k.Hash, check: k.Check, clock: ts, first: first, base: v}
	clear(c.extraOf(row))
	clear(c.block(row)) // reused memory: every bucket starts empty
}

// add applies one point to the series in row and reports whether finest
// buckets closed. The common point needs no division: the open buckets
// are the few after first, told apart by comparing ts with their edges.
func (c *chunk) add(row int, ts int64, v float64) (bool, error) {
	lay := c.lay
	h := &c.hot[row]
	w0 := lay.width[0]
	start := h.first * w0 // the oldest open bucket's
	if ts < start {
		return false, fmt.Errorf("%w: point at %d is %s before the oldest open bucket, which starts at %d (series clock %d)",
			ErrLate, ts, span(start-ts), start, h.clock)
	}
	d := v - h.base
	if math.IsInf(d, 0) {
		return false, fmt.Errorf("%w: %v is too far from the series' first value %v", ErrValue, v, h.base)
	}
	if ts <= h.clock || ts-lay.late < start+w0 {
		// No bucket closes: ts lies in one of the few open buckets.
		b := h.first
		for e := start + w0; ts >= e; e += w0 {
			b++
		}
		n, sum := c.slot(row, b)
		if *n == math.MaxUint32 {
			return false, errFull(ts)
		}
		h.clock = max(h.clock, ts)
		*n++
		*sum += d
		return false, nil
	}
	// Buckets close: ts-late has reached the end of the oldest.
	newest := floorDiv(h.clock, w0)
	b := floorDiv(ts, w0)
	n, sum := c.slot(row, b)
	if b <= newest && *n == math.MaxUint32 { // b is open already
		return false, errFull(ts)
	}
	nf := floorDiv(ts-lay.late, w0)
	c.advance(row, h.first, newest, nf)
	h.first, h.clock = nf, ts
	*n++ // b ≥ nf stays open; a slot that held a closed bucket is zero now
	*sum += d
	return true, nil
}

func errFull(ts int64) error {
	return fmt.Errorf("%w: %d points already in the bucket of %d", ErrFull, uint32(math.MaxUint32), ts)
}

// rings is the closed-bucket memory of one series while buckets close:
// its levels and, per level, the newest bucket the ring accounts for.
type rings struct {
	lay  *layout
	b    block
	head [maxLevels]int64
}

// advance closes the finest buckets of the series in row from first up to
// nf; newest is the newest bucket that was open. Closed buckets go to the
// finest ring and into the open accumulator of every coarser level; a
// coarser bucket closes as soon as all its finest buckets have, so every
// ring ends at the same instant when the widths divide it. The caller
// moves first to nf.
func (c *chunk) advance(row int, first, newest, nf int64) {
	lay := c.lay
	w0 := lay.width[0]
	r := rings{lay: lay, b: c.block(row)}
	hd := r.b.header()
	// The open coarse accumulator holds the bucket right after its ring's
	// head, unless a closing finest bucket moves it on.
	var num [maxLevels]int64
	for l := range lay.n {
		r.head[l] = head(lay, first, l)
		num[l] = r.head[l] + 1
	}
	for bn := first; bn < nf && bn <= newest; bn++ {
		pn, psum := c.slot(row, bn)
		if *pn == 0 {
			continue
		}
		o := acc{n: float64(*pn), sum: *psum}
		*pn, *psum = 0, 0
		r.put(0, bn, o)
		hd.points += uint64(o.n)
		for l := 1; l < lay.n; l++ {
			ca := &hd.coarse[l-1]
			if n := floorDiv(bn*w0, lay.width[l]); n != num[l] {
				if ca.n > 0 {
					r.put(l, num[l], *ca)
					*ca = acc{}
				}
				num[l] = n
			}
			ca.n += o.n
			ca.sum += o.sum
		}
	}
	r.skip(0, nf-1)
	for l := 1; l < lay.n; l++ {
		done := head(lay, nf, l) // newest coarse bucket now complete
		if ca := &hd.coarse[l-1]; ca.n > 0 && num[l] <= done {
			r.put(l, num[l], *ca)
			*ca = acc{}
		}
		r.skip(l, done)
	}
}

// put writes closed bucket num of level l to its ring; num is newer than
// anything the ring holds.
func (r *rings) put(l int, num int64, a acc) {
	r.skip(l, num-1)
	ring := r.b.ring(r.lay, l)
	m, n := ring.at(mod(num, r.lay.count[l]))
	*m = toFloat32(a.sum / a.n)
	*n = uint16(min(a.n, math.MaxUint16)) // saturates; the mean stays exact
	r.head[l] = num
}

// skip moves ring l forward to bucket upto, emptying the slots it passes
// over: gaps stay gaps. At most Count writes.
func (r *rings) skip(l int, upto int64) {
	from := r.head[l]
	if upto <= from {
		return
	}
	r.head[l] = upto
	n := r.lay.count[l]
	if upto-from >= n {
		from = upto - n
	}
	ring := r.b.ring(r.lay, l)
	for j, i := from+1, mod(from+1, n); j <= upto; j, i = j+1, next(i, n) {
		_, c := ring.at(i)
		*c = 0
	}
}

// span formats a positive number of milliseconds, falling back to plain
// milliseconds where a Duration would overflow.
func span(ms int64) string {
	if ms > math.MaxInt64/int64(time.Millisecond) {
		return fmt.Sprintf("%dms", ms)
	}
	return (time.Duration(ms) * time.Millisecond).String()
}

// toFloat32 rounds to float32, saturating instead of overflowing to
// infinity.
func toFloat32(x float64) float32 {
	switch {
	case x > math.MaxFloat32:
		return math.MaxFloat32
	case x < -math.MaxFloat32:
		return -math.MaxFloat32
	}
	return float32(x)
}

// floorDiv is a/b rounded towards minus infinity, for b > 0.
func floorDiv(a, b int64) int64 {
	q := a / b
	if a%b < 0 {
		q--
	}
	return q
}

// ceilDiv is a/b rounded towards plus infinity, for b > 0.
func ceilDiv(a, b int64) int64 {
	return -floorDiv(-a, b)
}

// mod is a mod b in [0, b), for b > 0.
func mod(a, b int64) int64 {
	m := a % b
	if m < 0 {
		m += b
	}
	return m
}
