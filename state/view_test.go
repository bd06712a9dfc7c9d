package state

import (
	"math"
	"testing"
	"time"
)

// checkComposite verifies the composite sequence of v against the raw
// points: oldest first, buckets that tile time without overlap or loss
// (no gaps in the data here), coarser before finer, each hand-over on a
// bucket edge of the coarser level, and each mean that of its interval.
func checkComposite(t *testing.T, v *View, pts []point, from int64) {
	t.Helper()
	if len(v.T) == 0 {
		t.Fatal("empty composite")
	}
	prevEnd := int64(math.MinInt64)
	prevW := math.Inf(1)
	total := 0
	for i := range v.T {
		wms := int64(math.Round(v.W[i] * 3600e3))
		start := v.End + int64(math.Round(v.T[i]*1000)) - wms/2
		end := start + wms
		if i == 0 {
			if start < from || start-from >= wms {
				t.Fatalf("composite starts at %d, want the first bucket at or after %d", start, from)
			}
		} else if start != prevEnd {
			t.Fatalf("point %d starts at %d, previous ended at %d: overlap or loss", i, start, prevEnd)
		}
		if v.W[i] > prevW {
			t.Fatalf("point %d is coarser than the one before", i)
		}
		if v.W[i] < prevW && i > 0 {
			coarse := int64(math.Round(prevW * 3600e3))
			if start%coarse != 0 {
				t.Fatalf("hand-over at %d is not on an edge of width %d", start, coarse)
			}
		}
		want, n := refMean(pts, start, end)
		if int(v.N[i]) != n || !close32(v.Y[i], want, pts[0].v) {
			t.Fatalf("point %d [%d, %d): mean %v n %d, want %v n %d", i, start, end, v.Y[i], v.N[i], want, n)
		}
		total += n
		prevEnd, prevW = end, v.W[i]
	}
	if prevEnd != v.End {
		t.Fatalf("composite ends at %d, want End %d", prevEnd, v.End)
	}
	first := v.End + int64(math.Round(v.T[0]*1000)) - int64(math.Round(v.W[0]*3600e3))/2
	if _, want := refMean(pts, first, v.End); total != want {
		t.Fatalf("composite counts %d points, %d lie in its span", total, want)
	}
}

// The composite hands over between levels on coarse bucket edges for any
// phase of End, for young and full histories, with and without maxAge.
func TestViewCut(t *testing.T) {
	cases := []struct {
		name   string
		dur    int64 // of history, points every 10 s
		maxAge time.Duration
	}{
		{"16 days, end on a day edge", 16 * 24 * hour, 0},
		{"16 days + 7 min", 16*24*hour + 7*minute, 0},
		{"16 days + 37 min", 16*24*hour + 37*minute, 0},
		{"16 days + 59 min", 16*24*hour + 59*minute, 0},
		{"16 days + 5 h 14 min", 16*24*hour + 5*hour + 14*minute, 0},
		{"3 h 20 min young", 3*hour + 20*minute, 0},
		{"30 h young", 30*hour + 44*minute, 0},
		{"16 days, last 30 h", 16*24*hour + 23*minute, 30 * time.Hour},
		{"16 days, last 90 min", 16*24*hour + 23*minute, 90 * time.Minute},
		{"16 days, last 47 min 30 s", 16*24*hour + 23*minute, 47*time.Minute + 30*time.Second},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			s := newStore(t, Config{Partitions: 1})
			k := testKey("v")
			var pts []point
			for ts := int64(t0); ts <= t0+c.dur; ts += 10 * sec {
				y := 50 + 20*math.Sin(float64(ts)/3.6e6) + float64(ts-t0)/1e7
				pts = append(pts, point{ts, y})
				mustAdd(t, s, k, ts, y)
			}
			v := viewOf(t, s, k, c.maxAge)
			if want := floorDiv(t0+c.dur-minute, minute) * minute; v.End != want {
				t.Fatalf("End %d, want %d", v.End, want)
			}
			lay := s.cfg.lay
			from := int64(t0)
			top := lay.width[lay.n-1]
			if reach := floorDiv(v.End, top)*top - lay.count[lay.n-1]*top; reach > from {
				from = reach
			}
			if c.maxAge > 0 {
				from = max(from, v.End-c.maxAge.Milliseconds())
			}
			checkComposite(t, &v, pts, from)
			if c.maxAge > 0 {
				for l, lv := range v.Levels {
					if lv.Start < v.End-c.maxAge.Milliseconds() {
						t.Errorf("level %d starts at %d, before End-maxAge", l, lv.Start)
					}
				}
			}
			if got := v.Span(); got != float64(v.End-(v.End+int64(v.T[0]*1000)-int64(v.W[0]*3600e3)/2))/1000 {
				t.Errorf("Span %v inconsistent with the oldest bucket", got)
			}
		})
	}
}

// A View into a reused View allocates nothing.
func TestViewNoAlloc(t *testing.T) {
	s := newStore(t, Config{Partitions: 1})
	k := testKey("a")
	for ts := int64(t0); ts < t0+15*24*hour; ts += 30 * sec {
		mustAdd(t, s, k, ts, float64(ts%7))
	}
	var v View
	fn := func(se *Series) { se.View(&v, 0) }
	s.Do(k, fn)
	if n := testing.AllocsPerRun(20, func() { s.Do(k, fn) }); n != 0 {
		t.Errorf("View allocates %v times per call", n)
	}
}

// A series that has closed nothing yet has an empty view.
func TestViewEmpty(t *testing.T) {
	s := newStore(t, Config{})
	k := testKey("e")
	mustAdd(t, s, k, t0, 1)
	v := viewOf(t, s, k, 0)
	if v.End != 0 || v.Len() != 0 || v.Span() != 0 || len(v.Levels) != 3 || v.Key != "e" || v.Hash != k.Hash {
		t.Errorf("view of a fresh series: %+v", v)
	}
}
