package state

import (
	"math"
	"testing"
	"time"
)

// t0 is a day boundary (2023-11-14 00:00 UTC) in unix ms, so that every
// bucket width of the default layout divides it.
const t0 = 19675 * 86_400_000

const (
	sec    = int64(time.Second / time.Millisecond)
	minute = 60 * sec
	hour   = 60 * minute
)

func testKey(s string) Key {
	return Key{Hash: Hash([]byte(s)), Text: []byte(s)}
}

func newStore(t testing.TB, cfg Config) *Store {
	t.Helper()
	s, err := New(cfg)
	if err != nil {
		t.Fatal(err)
	}
	return s
}

func mustAdd(t testing.TB, s *Store, k Key, ts int64, v float64) {
	t.Helper()
	if err := s.Add(k, ts, v, nil); err != nil {
		t.Fatalf("Add(%s, %d, %v): %v", k.Text, ts, v, err)
	}
}

func viewOf(t testing.TB, s *Store, k Key, maxAge time.Duration) View {
	t.Helper()
	var v View
	if !s.Do(k, func(se *Series) { se.View(&v, maxAge) }) {
		t.Fatalf("series %s missing", k.Text)
	}
	return v
}

type point struct {
	ts int64
	v  float64
}

// refMean is the mean of the points whose timestamp lies in [lo, hi), and
// their number; an independent reading of what a bucket must hold.
func refMean(pts []point, lo, hi int64) (float64, int) {
	var sum float64
	n := 0
	for _, p := range pts {
		if p.ts >= lo && p.ts < hi {
			sum += p.v
			n++
		}
	}
	if n == 0 {
		return math.NaN(), 0
	}
	return sum / float64(n), n
}

// close32 accepts the rounding of a mean stored as float32 relative to the
// series base.
func close32(got, want, base float64) bool {
	return math.Abs(got-want) <= 1e-6*math.Abs(want-base)+1e-9*math.Abs(want)+1e-12
}

// sameView compares two views bit for bit (NaN equals NaN).
func sameView(a, b *View) bool {
	if a.Key != b.Key || a.Hash != b.Hash || a.End != b.End || len(a.T) != len(b.T) || len(a.Levels) != len(b.Levels) {
		return false
	}
	for i := range a.T {
		if a.T[i] != b.T[i] || math.Float64bits(a.Y[i]) != math.Float64bits(b.Y[i]) || a.W[i] != b.W[i] || a.N[i] != b.N[i] {
			return false
		}
	}
	for l := range a.Levels {
		x, y := a.Levels[l], b.Levels[l]
		if x.Width != y.Width || x.Start != y.Start || len(x.Y) != len(y.Y) {
			return false
		}
		for i := range x.Y {
			if math.Float64bits(x.Y[i]) != math.Float64bits(y.Y[i]) {
				return false
			}
		}
	}
	return true
}
