package forecast

import (
	"math"
	"math/rand/v2"

	"github.com/headroom-dev/headroom/state"
)

// Test data in this package is invented for scenario tests unless a test
// says otherwise: minute means of a made-up truth plus seeded normal noise.

const (
	minute = int64(60_000)
	hour   = 60 * minute
)

// series is an invented history at one-minute resolution.
type series struct {
	start int64     // unix ms of minute 0, hour aligned
	v     []float64 // minute means; NaN where there is no data
	sum   []float64 // prefix sums of v, NaN counted as 0
	cnt   []int     // prefix counts of non-NaN minutes
}

// newSeries makes minutes minutes of truth(i) plus normal noise of sd sigma.
func newSeries(minutes int, sigma float64, seed uint64, truth func(i int) float64) *series {
	rng := rand.New(rand.NewPCG(seed, 0x5eed))
	s := &series{start: 1_700_000_000_000 / hour * hour, v: make([]float64, minutes)}
	for i := range s.v {
		s.v[i] = truth(i) + sigma*rng.NormFloat64()
	}
	s.index()
	return s
}

func (s *series) index() {
	s.sum = make([]float64, len(s.v)+1)
	s.cnt = make([]int, len(s.v)+1)
	for i, v := range s.v {
		s.sum[i+1], s.cnt[i+1] = s.sum[i], s.cnt[i]
		if !math.IsNaN(v) {
			s.sum[i+1] += v
			s.cnt[i+1]++
		}
	}
}

// end returns the unix ms at which minute i has just closed.
func (s *series) end(i int) int64 { return s.start + int64(i+1)*minute }

// mean is the mean of the minutes in [from, to) unix ms and their count.
func (s *series) mean(from, to int64) (float64, int) {
	a := int(max(0, (from-s.start)/minute))
	b := int(min(int64(len(s.v)), max(0, (to-s.start)/minute)))
	if b <= a {
		return 0, 0
	}
	c := s.cnt[b] - s.cnt[a]
	if c == 0 {
		return 0, 0
	}
	return (s.sum[b] - s.sum[a]) / float64(c), c
}

// view fills dst with the history the store's default layout holds at end
// (unix ms, minute aligned): hourly buckets for two weeks, fifteen-minute
// buckets for a day, one-minute buckets for two hours, merged without
// overlap, oldest first, empty buckets left out.
func (s *series) view(end int64, dst *state.View) {
	dst.End = end
	dst.T, dst.Y, dst.W, dst.N = dst.T[:0], dst.Y[:0], dst.W[:0], dst.N[:0]
	floor := func(t, w int64) int64 { return t / w * w }
	ceil := func(t, w int64) int64 { return (t + w - 1) / w * w }
	q := 15 * minute
	cutQ := ceil(end-120*minute, q)
	cutH := ceil(floor(end, q)-96*q, hour)
	startH := floor(end, hour) - 336*hour
	add := func(from, to, w int64) {
		for t := from; t < to; t += w {
			m, c := s.mean(t, t+w)
			if c == 0 {
				continue
			}
			dst.T = append(dst.T, float64(t+w/2-end)/1000)
			dst.Y = append(dst.Y, m)
			dst.W = append(dst.W, float64(w)/float64(hour))
			dst.N = append(dst.N, uint32(6*c))
		}
	}
	add(startH, cutH, hour)
	add(cutH, cutQ, q)
	add(cutQ, end, minute)

	dst.Levels = dst.Levels[:0]
	for _, l := range []struct {
		w     int64
		count int
	}{{minute, 120}, {q, 96}, {hour, 336}} {
		lv := state.LevelView{Width: l.w, Start: floor(end, l.w) - int64(l.count)*l.w}
		for i := range l.count {
			t := lv.Start + int64(i)*l.w
			m, c := s.mean(t, t+l.w)
			if c == 0 {
				m = math.NaN()
			}
			lv.Y = append(lv.Y, m)
		}
		dst.Levels = append(dst.Levels, lv)
	}
}

func nan() float64 { return math.NaN() }

// fitAt fits the view at the close of minute i.
func (s *series) fitAt(i int, e Incline) (Forecast, bool) {
	var v state.View
	var f Forecast
	s.view(s.end(i), &v)
	ok := e.Fit(&v, NewScratch(), &f)
	return f, ok
}
