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

// reset prepares a fresh or reused slot for a new series whose first point
// is at ts with value v.
func (s *Series) reset(lay *layout, key string, hash uint64, ts int64, v float64) {
	ch, row, incidents := s.ch, s.row, s.incidents[:0]
	*s = Series{key: key, hash: hash, ch: ch, row: row, live: true, incidents: incidents}
	s.clock = ts
	s.base = v
	s.first = floorDiv(ts-lay.late, lay.width[0])
	_, count := s.rows()
	clear(count) // reused memory: every bucket starts empty
}

// add applies one point and reports whether finest buckets closed.
func (s *Series) add(lay *layout, ts int64, v float64) (bool, error) {
	w0 := lay.width[0]
	b := floorDiv(ts, w0)
	if b < s.first {
		start := s.first * w0
		return false, fmt.Errorf("%w: point at %d is %s before the oldest open bucket, which starts at %d (series clock %d)",
			ErrLate, ts, span(start-ts), start, s.clock)
	}
	d := v - s.base
	if math.IsInf(d, 0) {
		return false, fmt.Errorf("%w: %v is too far from the series' first value %v", ErrValue, v, s.base)
	}
	closed := false
	if ts > s.clock {
		old := s.clock
		s.clock = ts
		if nf := floorDiv(ts-lay.late, w0); nf > s.first {
			s.advance(lay, floorDiv(old, w0), nf)
			closed = true
		}
	}
	o := &s.open[b&(openSlots-1)]
	o.n++
	o.sum += d
	s.points++
	return closed, nil
}

// rings is the closed-bucket memory of one series while buckets close:
// its rows and, per level, the newest bucket the ring accounts for.
type rings struct {
	lay   *layout
	mean  []float32
	count []uint16
	head  [maxLevels]int64
}

// advance closes the finest buckets before nf; newest is the newest bucket
// that was open. Closed buckets go to the finest ring and into the open
// accumulator of every coarser level; a coarser bucket closes as soon as
// all its finest buckets have, so every ring ends at the same instant when
// the widths divide it.
func (s *Series) advance(lay *layout, newest, nf int64) {
	w0 := lay.width[0]
	r := rings{lay: lay}
	r.mean, r.count = s.rows()
	// The open coarse accumulator holds the bucket right after its ring's
	// head, unless a closing finest bucket moves it on.
	var num [maxLevels]int64
	for l := range lay.n {
		r.head[l] = s.head(lay, l)
		num[l] = r.head[l] + 1
	}
	for c := s.first; c < nf && c <= newest; c++ {
		o := &s.open[c&(openSlots-1)]
		if o.n == 0 {
			continue
		}
		r.put(0, c, *o)
		for l := 1; l < lay.n; l++ {
			ca := &s.coarse[l-1]
			if n := floorDiv(c*w0, lay.width[l]); n != num[l] {
				if ca.n > 0 {
					r.put(l, num[l], *ca)
					*ca = acc{}
				}
				num[l] = n
			}
			ca.n += o.n
			ca.sum += o.sum
		}
		*o = acc{}
	}
	s.first = nf
	s.closedAny = true
	r.skip(0, nf-1)
	for l := 1; l < lay.n; l++ {
		done := s.head(lay, l) // newest coarse bucket now complete
		if ca := &s.coarse[l-1]; ca.n > 0 && num[l] <= done {
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
	i := r.lay.offset[l] + mod(num, r.lay.count[l])
	r.mean[i] = toFloat32(a.sum / a.n)
	r.count[i] = uint16(min(a.n, math.MaxUint16)) // saturates; the mean stays exact
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
	off, n := r.lay.offset[l], r.lay.count[l]
	ring := r.count[off : off+n]
	if upto-from >= n {
		clear(ring)
		return
	}
	for j := from + 1; j <= upto; j++ {
		ring[mod(j, n)] = 0
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
