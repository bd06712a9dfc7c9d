package state

import (
	"math"
	"time"
)

// View fills dst with the closed history of the series, reusing the
// capacity of dst's slices, so that a steady caller does not allocate.
//
// The composite sequence takes each level where no finer level reaches:
// level l covers [cut(l), cut(l-1)), where cut(l) is the start of the finer
// ring rounded up to a bucket edge of the coarser level, and the finest
// level runs to End. Every instant is counted once and none is lost. With
// maxAge > 0, buckets that start before End-maxAge are left out, from the
// composite and from Levels alike.
//
// Counts saturate at 65535 points per bucket; the means stay exact. Until
// a finest bucket has closed, End is 0 and the view is empty.
func (s *Series) View(dst *View, maxAge time.Duration) {
	lay := s.ch.lay
	h := s.hot()
	dst.Key, dst.Hash = s.key, h.hash
	dst.End = s.Closed()
	dst.T, dst.Y, dst.W, dst.N = dst.T[:0], dst.Y[:0], dst.W[:0], dst.N[:0]
	if cap(dst.Levels) < lay.n {
		levels := make([]LevelView, lay.n)
		copy(levels, dst.Levels[:cap(dst.Levels)])
		dst.Levels = levels
	}
	dst.Levels = dst.Levels[:lay.n]
	for l := range dst.Levels {
		dst.Levels[l] = LevelView{Width: lay.width[l], Y: dst.Levels[l].Y[:0]}
	}
	first := h.first
	if first <= s.born {
		return
	}

	end := dst.End
	cutoff := int64(-1 << 62) // before any accepted time, and safe to round
	if maxAge > 0 {
		cutoff = end - min(maxAge.Milliseconds(), maxAbsTime)
	}
	blk := s.ch.block(int(s.row))
	var last [maxLevels]int64
	for l := range lay.n {
		last[l] = head(lay, first, l)
	}

	// Each ring as a uniform sequence.
	for l := range dst.Levels {
		w, n := lay.width[l], lay.count[l]
		from := max(last[l]-n+1, ceilDiv(cutoff, w))
		lv := &dst.Levels[l]
		lv.Start = from * w
		r := blk.ring(lay, l)
		for j, i := from, mod(from, n); j <= last[l]; j, i = j+1, next(i, n) {
			m, c := r.at(i)
			if *c == 0 {
				lv.Y = append(lv.Y, math.NaN())
				continue
			}
			lv.Y = append(lv.Y, h.base+float64(*m))
		}
	}

	// The composite, coarsest level first. hi is where the finer level
	// takes over; lo where this level hands over to the coarser one.
	var hi [maxLevels]int64
	hi[0] = end
	lo := [maxLevels]int64{}
	for l := 0; l < lay.n; l++ {
		start := (last[l] - lay.count[l] + 1) * lay.width[l]
		lo[l] = start
		if l+1 < lay.n {
			lo[l] = ceilDiv(start, lay.width[l+1]) * lay.width[l+1]
			hi[l+1] = lo[l]
		}
	}
	for l := lay.n - 1; l >= 0; l-- {
		w, n := lay.width[l], lay.count[l]
		from := max(lo[l]/w, last[l]-n+1, ceilDiv(cutoff, w))
		to := min(hi[l]/w-1, last[l])
		wh := float64(w) / float64(time.Hour/time.Millisecond)
		r := blk.ring(lay, l)
		for j, i := from, mod(from, n); j <= to; j, i = j+1, next(i, n) {
			m, c := r.at(i)
			if *c == 0 {
				continue
			}
			dst.T = append(dst.T, (float64(j*w-end)+float64(w)/2)/1000)
			dst.Y = append(dst.Y, h.base+float64(*m))
			dst.W = append(dst.W, wh)
			dst.N = append(dst.N, uint32(*c))
		}
	}
}

// next steps a ring index.
func next(i, n int64) int64 {
	if i++; i == n {
		return 0
	}
	return i
}
