package state

import (
	"errors"
	"math"
	"math/rand/v2"
	"strings"
	"testing"
	"time"
)

// A step-by-step scenario on the default layout (1-minute buckets, lateness
// one minute): which points close which buckets, and what a View shows.
func TestClosing(t *testing.T) {
	steps := []struct {
		name       string
		ts         int64
		v          float64
		late       bool
		wantClose  bool
		wantClosed int64
	}{
		{"first point opens buckets -1 and 0", t0 + 10*sec, 1, false, false, 0},
		{"same bucket", t0 + 50*sec, 3, false, false, 0},
		{"bucket 1 closes the empty bucket -1", t0 + 70*sec, 5, false, true, t0},
		{"bucket 2 closes bucket 0", t0 + 130*sec, 7, false, true, t0 + minute},
		{"late into open bucket 1", t0 + 100*sec, 9, false, false, t0 + minute},
		{"late into closed bucket 0", t0 + 50*sec, 11, true, false, t0 + minute},
		{"same timestamp as the clock", t0 + 130*sec, 7, false, false, t0 + minute},
		{"jump closes 1, 2 and empty 3..8", t0 + 10*minute, 0, false, true, t0 + 9*minute},
	}
	s := newStore(t, Config{})
	k := testKey("cpu")
	for _, st := range steps {
		closes := 0
		err := s.Add(k, st.ts, st.v, func(*Series) { closes++ })
		if st.late {
			if !errors.Is(err, ErrLate) {
				t.Fatalf("%s: err %v, want ErrLate", st.name, err)
			}
		} else if err != nil {
			t.Fatalf("%s: %v", st.name, err)
		}
		if want := map[bool]int{false: 0, true: 1}[st.wantClose]; closes != want {
			t.Errorf("%s: onClose called %d times, want %d", st.name, closes, want)
		}
		s.Do(k, func(se *Series) {
			if got := se.Closed(); got != st.wantClosed {
				t.Errorf("%s: Closed() = %d, want %d", st.name, got, st.wantClosed)
			}
		})
	}
	v := viewOf(t, s, k, 0)
	wantT := []float64{-510, -450, -390}
	wantY := []float64{2, 7, 7}
	wantN := []uint32{2, 2, 2}
	if v.End != t0+9*minute || len(v.T) != len(wantT) {
		t.Fatalf("End %d, %d points; want %d, %d", v.End, len(v.T), t0+9*minute, len(wantT))
	}
	for i := range wantT {
		if v.T[i] != wantT[i] || v.Y[i] != wantY[i] || v.N[i] != wantN[i] || v.W[i] != 1.0/60 {
			t.Errorf("point %d: (%v, %v, %v, %v), want (%v, %v, %v, 1/60)", i, v.T[i], v.Y[i], v.N[i], v.W[i], wantT[i], wantY[i], wantN[i])
		}
	}
	s.Do(k, func(se *Series) {
		if se.Points() != 7 || se.Newest() != t0+10*minute {
			t.Errorf("Points %d Newest %d, want 7 and %d", se.Points(), se.Newest(), t0+10*minute)
		}
	})
}

// Lateness: a bucket stays open until the series clock reaches its end plus
// the lateness; points in open buckets merge, points in closed ones are
// rejected.
func TestLateness(t *testing.T) {
	cases := []struct {
		name   string
		late   time.Duration
		clock  int64 // first point
		ts     int64 // second point
		isLate bool
	}{
		{"1m: previous bucket open", time.Minute, t0 + 90*sec, t0, false},
		{"1m: two buckets back closed", time.Minute, t0 + 90*sec, t0 - 1, true},
		{"1m: exactly at end+lateness closes", time.Minute, t0 + 2*minute, t0 + 59*sec, true},
		{"1m: just before end+lateness open", time.Minute, t0 + 2*minute - 1, t0, false},
		{"3m: three buckets back open", 3 * time.Minute, t0 + 3*minute + 30*sec, t0, false},
		{"3m: four buckets back closed", 3 * time.Minute, t0 + 3*minute + 30*sec, t0 - 1, true},
		{"150s: mid-bucket lateness open", 150 * time.Second, t0 + 200*sec, t0, false},
		{"150s: mid-bucket lateness closed", 150 * time.Second, t0 + 210*sec, t0 + 59*sec, true},
		{"150s: next bucket open", 150 * time.Second, t0 + 210*sec, t0 + minute, false},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			s := newStore(t, Config{Lateness: c.late, Partitions: 1})
			k := testKey("x")
			mustAdd(t, s, k, c.clock, 1)
			err := s.Add(k, c.ts, 3, nil)
			if c.isLate {
				if !errors.Is(err, ErrLate) || !strings.Contains(err.Error(), "before the oldest open bucket") {
					t.Fatalf("err %v, want ErrLate with detail", err)
				}
				return
			}
			if err != nil {
				t.Fatal(err)
			}
			// Close everything and find the late point in its bucket.
			mustAdd(t, s, k, c.clock+time.Hour.Milliseconds(), 5)
			v := viewOf(t, s, k, 0)
			b := floorDiv(c.ts, minute) * minute
			found := false
			for i := range v.T {
				if v.End+int64(v.T[i]*1000)-30*sec == b {
					found = true
					want, n := refMean([]point{{c.clock, 1}, {c.ts, 3}}, b, b+minute)
					if v.Y[i] != want || int(v.N[i]) != n {
						t.Errorf("bucket %d: mean %v n %d, want %v n %d", b, v.Y[i], v.N[i], want, n)
					}
				}
			}
			if !found {
				t.Errorf("bucket of the late point missing from the view")
			}
		})
	}
}

// Points out of order within the open window merge into their buckets.
func TestOutOfOrderMerge(t *testing.T) {
	s := newStore(t, Config{})
	k := testKey("m")
	for _, p := range []point{{t0 + 50*sec, 1}, {t0 + 10*sec, 3}, {t0 + 70*sec, 4}, {t0 + 20*sec, 5}, {t0 + 3*minute, 0}} {
		mustAdd(t, s, k, p.ts, p.v)
	}
	v := viewOf(t, s, k, 0)
	if len(v.Y) != 2 || v.Y[0] != 3 || v.N[0] != 3 || v.Y[1] != 4 || v.N[1] != 1 {
		t.Fatalf("view Y %v N %v, want [3 4] [3 1]", v.Y, v.N)
	}
}

// Gaps are gaps: a bucket without points never shows up as a zero, neither
// in the composite nor in the uniform levels, and a long silence leaves
// only empty buckets behind.
func TestGapsStayEmpty(t *testing.T) {
	cases := []struct {
		name  string
		every int64 // one point at the start of each period
		dur   int64
	}{
		{"half-hourly for three days", 30 * minute, 72 * hour},
		{"every 7 minutes for a day", 7 * minute, 24 * hour},
		{"every 3 hours for ten days", 3 * hour, 240 * hour},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			s := newStore(t, Config{Partitions: 1})
			k := testKey("g")
			var pts []point
			for ts := int64(t0); ts <= t0+c.dur; ts += c.every {
				pts = append(pts, point{ts, 100})
				mustAdd(t, s, k, ts, 100)
			}
			// A silence far longer than every ring, then one point.
			mustAdd(t, s, k, t0+c.dur+30*24*hour, 100)
			for _, v := range []View{viewOf(t, s, k, 0)} {
				for i, y := range v.Y {
					if y != 100 || v.N[i] == 0 {
						t.Fatalf("composite point %d: Y %v N %d, want 100 and a count", i, y, v.N[i])
					}
				}
				for l, lv := range v.Levels {
					for i, y := range lv.Y {
						if !math.IsNaN(y) {
							t.Fatalf("level %d bucket %d: %v after a month of silence, want NaN", l, i, y)
						}
					}
				}
				if len(v.Y) != 0 {
					t.Fatalf("%d composite points after a month of silence, want 0", len(v.Y))
				}
			}
			// Before the silence: rebuild and look at the populated history.
			s = newStore(t, Config{Partitions: 1})
			for _, p := range pts {
				mustAdd(t, s, k, p.ts, p.v)
			}
			mustAdd(t, s, k, pts[len(pts)-1].ts+2*minute, 100)
			v := viewOf(t, s, k, 0)
			if len(v.Y) == 0 {
				t.Fatal("empty view")
			}
			for i, y := range v.Y {
				if y != 100 || v.N[i] == 0 {
					t.Fatalf("composite point %d: Y %v N %d, want 100", i, y, v.N[i])
				}
			}
			for l, lv := range v.Levels {
				for i, y := range lv.Y {
					start := lv.Start + int64(i)*lv.Width
					_, n := refMean(pts, start, start+lv.Width)
					if (n == 0) != math.IsNaN(y) || (n > 0 && y != 100) {
						t.Fatalf("level %d bucket at %d: %v with %d points", l, start, y, n)
					}
				}
			}
		})
	}
}

// Rollup: every closed bucket of every level holds the mean of the raw
// points in its interval, also for large values far from zero, with
// irregular spacing, out-of-order points and gaps.
func TestRollup(t *testing.T) {
	cases := []struct {
		name string
		base float64
		seed uint64
	}{
		{"small values", 0, 1},
		{"byte counters", 3.2e12, 2},
		{"negative", -5e4, 3},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			rng := rand.New(rand.NewPCG(c.seed, 7))
			s := newStore(t, Config{Partitions: 1, Lateness: 2 * time.Minute})
			k := testKey("r")
			var pts []point
			ts, v := int64(t0+17*sec), c.base
			for ts < t0+20*24*hour {
				ts += 1 + rng.Int64N(40*sec)
				if rng.IntN(20000) == 0 {
					ts += rng.Int64N(5 * hour) // a gap
				}
				v += rng.NormFloat64() * 10
				p := point{ts, v}
				if rng.IntN(10) == 0 {
					p.ts -= rng.Int64N(90 * sec) // late, but within lateness
				}
				mustAdd(t, s, k, p.ts, p.v)
				pts = append(pts, p)
			}
			view := viewOf(t, s, k, 0)
			checked := 0
			for l, lv := range view.Levels {
				w := lv.Width
				if end := lv.Start + int64(len(lv.Y))*w; end != floorDiv(view.End, w)*w {
					t.Errorf("level %d closed through %d, want %d", l, end, floorDiv(view.End, w)*w)
				}
				for i, y := range lv.Y {
					start := lv.Start + int64(i)*w
					want, n := refMean(pts, start, start+w)
					if n == 0 {
						if !math.IsNaN(y) {
							t.Fatalf("level %d at %d: %v, want empty", l, start, y)
						}
						continue
					}
					if !close32(y, want, pts[0].v) { // the series base is its first value
						t.Fatalf("level %d at %d: mean %v, want %v (n %d)", l, start, y, want, n)
					}
					checked++
				}
			}
			if checked < 300 {
				t.Errorf("only %d buckets checked", checked)
			}
		})
	}
}

// onClose runs once per point that closes buckets, after the coarser levels
// have caught up: every ring then ends at End rounded down to its width.
func TestOnClose(t *testing.T) {
	s := newStore(t, Config{Partitions: 1})
	k := testKey("c")
	var v View
	calls, closingPoints := 0, 0
	for ts := int64(t0); ts < t0+3*24*hour; ts += 10 * sec {
		before := int64(-1)
		s.Do(k, func(se *Series) { before = se.Closed() })
		n := 0
		err := s.Add(k, ts, float64(ts%hour), func(se *Series) {
			n++
			se.View(&v, 0)
			for l, lv := range v.Levels {
				if end := lv.Start + int64(len(lv.Y))*lv.Width; end != floorDiv(v.End, lv.Width)*lv.Width {
					t.Fatalf("at %d level %d ends at %d, want %d", ts, l, end, floorDiv(v.End, lv.Width)*lv.Width)
				}
			}
		})
		if err != nil {
			t.Fatal(err)
		}
		calls += n
		if n > 1 {
			t.Fatalf("onClose called %d times for one point", n)
		}
		s.Do(k, func(se *Series) {
			if (se.Closed() != before && before != -1) != (n == 1) {
				t.Fatalf("at %d: Closed moved %d→%d but onClose called %d times", ts, before, se.Closed(), n)
			}
		})
		if ts%minute == 0 && ts > t0 {
			closingPoints++
		}
	}
	if calls != closingPoints {
		t.Errorf("onClose called %d times, want %d (one per minute)", calls, closingPoints)
	}
}
