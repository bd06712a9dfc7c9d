package state

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"sync"
	"testing"
	"time"
)

func TestNewConfig(t *testing.T) {
	cases := []struct {
		name string
		cfg  Config
		ok   bool
	}{
		{"zero takes defaults", Config{}, true},
		{"one level", Config{Layout: []Level{{time.Minute, 60}}}, true},
		{"lateness three widths", Config{Lateness: 3 * time.Minute}, true},
		{"lateness too large", Config{Lateness: 3*time.Minute + time.Millisecond}, false},
		{"negative lateness", Config{Lateness: -time.Second}, false},
		{"sub-millisecond lateness", Config{Lateness: time.Microsecond}, false},
		{"width not a multiple", Config{Layout: []Level{{time.Minute, 120}, {90 * time.Second, 100}}}, false},
		{"equal widths", Config{Layout: []Level{{time.Minute, 120}, {time.Minute, 100}}}, false},
		{"finer ring shorter than a coarse bucket", Config{Layout: []Level{{time.Minute, 10}, {15 * time.Minute, 96}}}, false},
		{"coarser level reaches less far", Config{Layout: []Level{{time.Minute, 120}, {15 * time.Minute, 4}}}, false},
		{"zero width", Config{Layout: []Level{{0, 10}}}, false},
		{"sub-millisecond width", Config{Layout: []Level{{time.Microsecond, 10}}}, false},
		{"zero count", Config{Layout: []Level{{time.Minute, 0}}}, false},
		{"huge count", Config{Layout: []Level{{time.Minute, math.MaxInt}}}, false},
		{"too many buckets", Config{Layout: []Level{{time.Minute, 1 << 16}, {time.Hour, 1 << 16}}}, false},
		{"width of centuries", Config{Layout: []Level{{200 * 365 * 24 * time.Hour, 10}}}, false},
		{"chunk memory too large", Config{Layout: []Level{{time.Minute, 1 << 15}}, ChunkSize: 1 << 14}, false},
		{"five levels", Config{Layout: []Level{{time.Second, 120}, {time.Minute, 120}, {time.Hour, 48}, {24 * time.Hour, 30}, {240 * time.Hour, 30}}}, false},
		{"negative partitions", Config{Partitions: -1}, false},
		{"too many partitions", Config{Partitions: 1 << 17}, false},
		{"huge series limit", Config{MaxSeries: math.MaxInt}, false},
		{"negative series limit", Config{MaxSeries: -1}, false},
		{"chunk too large", Config{ChunkSize: 1 << 17}, false},
		{"chunk too small for the limit", Config{ChunkSize: 1, MaxSeries: 1 << 20}, false},
	}
	for _, c := range cases {
		_, err := New(c.cfg)
		if (err == nil) != c.ok {
			t.Errorf("%s: err %v, want ok=%v", c.name, err, c.ok)
		}
	}
	s := newStore(t, Config{})
	if s.Partitions() != 64 || len(s.Layout()) != 3 || s.Layout()[2] != (Level{time.Hour, 336}) || s.cfg.lay.late != minute {
		t.Errorf("defaults: %d partitions, layout %v, lateness %d", s.Partitions(), s.Layout(), s.cfg.lay.late)
	}
	s.Layout()[0].Count = 1 // a copy
	if s.Layout()[0].Count != 120 {
		t.Error("Layout returned the store's own slice")
	}
	if b := s.BytesPerSeries(); b > 4096 || b < 552*6 {
		t.Errorf("BytesPerSeries %d, want within [%d, 4096]", b, 552*6)
	}
}

func TestRejectedValues(t *testing.T) {
	s := newStore(t, Config{})
	k := testKey("v")
	mustAdd(t, s, k, t0, math.MaxFloat64)
	cases := []struct {
		ts   int64
		v    float64
		want error
	}{
		{t0, math.NaN(), ErrValue},
		{t0, math.Inf(1), ErrValue},
		{t0, math.Inf(-1), ErrValue},
		{t0, -math.MaxFloat64, ErrValue}, // finite, but its distance from the first value is not
		{1<<53 + 1, 1, ErrTime},
		{-(1<<53 + 1), 1, ErrTime},
		{math.MinInt64, 1, ErrTime},
	}
	for _, c := range cases {
		if err := s.Add(k, c.ts, c.v, nil); !errors.Is(err, c.want) {
			t.Errorf("Add(%d, %v): %v, want %v", c.ts, c.v, err, c.want)
		}
	}
	if err := s.Add(testKey("new"), t0, math.NaN(), nil); !errors.Is(err, ErrValue) || s.Len() != 1 {
		t.Errorf("NaN on a new series: %v, %d series", err, s.Len())
	}
	s.Do(k, func(se *Series) {
		if se.Points() != 1 {
			t.Errorf("%d points accepted, want 1", se.Points())
		}
	})
	// Extreme but valid timestamps work.
	for _, ts := range [][2]int64{{1 << 53, 1<<53 - 30*sec}, {-(1 << 53), -(1 << 53) + 3*minute}, {0, -30 * sec}, {-1, -1}} {
		k := testKey(fmt.Sprint("t", ts))
		mustAdd(t, s, k, ts[0], 1)
		mustAdd(t, s, k, ts[1], 2)
	}
}

func TestSeriesCap(t *testing.T) {
	s := newStore(t, Config{MaxSeries: 3, Partitions: 2})
	for i := range 3 {
		mustAdd(t, s, testKey(fmt.Sprint("s", i)), t0, 1)
	}
	if err := s.Add(testKey("s3"), t0, 1, nil); !errors.Is(err, ErrSeriesCap) {
		t.Fatalf("4th series: %v, want ErrSeriesCap", err)
	}
	mustAdd(t, s, testKey("s0"), t0+sec, 2) // existing series still accept points
	if s.Len() != 3 {
		t.Fatalf("Len %d, want 3", s.Len())
	}
	if !s.Delete(testKey("s1")) {
		t.Fatal("Delete failed")
	}
	mustAdd(t, s, testKey("s3"), t0, 1)
	if s.Len() != 3 {
		t.Fatalf("Len %d, want 3", s.Len())
	}
}

// A deleted series' slot and bucket memory go to the next new series, which
// starts empty.
func TestDeleteReuse(t *testing.T) {
	s := newStore(t, Config{Partitions: 1, ChunkSize: 16, MaxSeries: 1000})
	for i := range 16 {
		k := testKey(fmt.Sprint("s", i))
		for ts := int64(t0); ts < t0+3*hour; ts += 10 * sec {
			mustAdd(t, s, k, ts, 7)
		}
		s.Do(k, func(se *Series) {
			se.Incident(3, true).Phase = Open
			se.Memo().Evaluated = 1
		})
	}
	p := &s.parts[0]
	if p.slots != 16 || len(p.chunks) != 1 {
		t.Fatalf("%d slots in %d chunks, want 16 in 1", p.slots, len(p.chunks))
	}
	if s.Delete(testKey("absent")) {
		t.Error("Delete of an absent series reported true")
	}
	if !s.Delete(testKey("s5")) || s.Len() != 15 {
		t.Fatalf("Delete failed, Len %d", s.Len())
	}
	if s.Do(testKey("s5"), func(*Series) {}) || s.Delete(testKey("s5")) {
		t.Error("deleted series still found")
	}
	k := testKey("fresh")
	mustAdd(t, s, k, t0+5*hour, 1)
	mustAdd(t, s, k, t0+5*hour+2*minute, 1)
	if p.slots != 16 || len(p.chunks) != 1 || s.Len() != 16 {
		t.Fatalf("reuse grew the slab: %d slots, %d chunks, %d series", p.slots, len(p.chunks), s.Len())
	}
	v := viewOf(t, s, k, 0)
	if v.Len() != 1 || v.Y[0] != 1 {
		t.Errorf("fresh series sees old data: Y %v", v.Y)
	}
	for l, lv := range v.Levels {
		for _, y := range lv.Y {
			if !math.IsNaN(y) && y != 1 {
				t.Fatalf("level %d holds %v from the deleted series", l, y)
			}
		}
	}
	s.Do(k, func(se *Series) {
		if se.Incident(3, false) != nil || len(se.Incidents()) != 0 || se.Memo().Evaluated != 0 || se.Points() != 2 {
			t.Error("fresh series inherited incidents, memo or points")
		}
	})
	// One more series needs a new chunk.
	mustAdd(t, s, testKey("17th"), t0, 1)
	if p.slots != 32 || len(p.chunks) != 2 {
		t.Errorf("%d slots in %d chunks, want 32 in 2", p.slots, len(p.chunks))
	}
	n := 0
	s.Range(0, func(*Series) bool { n++; return true })
	if n != 17 {
		t.Errorf("Range visited %d series, want 17", n)
	}
	n = 0
	s.Range(0, func(*Series) bool { n++; return n < 5 })
	s.Range(-1, func(*Series) bool { n++; return true })
	s.Range(1, func(*Series) bool { n++; return true })
	if n != 5 {
		t.Errorf("Range visited %d series, want 5", n)
	}
}

// Keys sharing a hash are told apart by their text.
func TestHashCollision(t *testing.T) {
	s := newStore(t, Config{Partitions: 4})
	a := Key{Hash: 42, Text: []byte(`m{a="1"}`)}
	b := Key{Hash: 42, Text: []byte(`m{a="2"}`)}
	c := Key{Hash: 42, Text: []byte(`m{a="3"}`)}
	mustAdd(t, s, a, t0, 1)
	mustAdd(t, s, b, t0, 2)
	mustAdd(t, s, b, t0+sec, 2)
	points := func(k Key) uint64 {
		var n uint64
		if !s.Do(k, func(se *Series) { n = se.Points() }) {
			return 0
		}
		return n
	}
	if points(a) != 1 || points(b) != 2 || points(c) != 0 || s.Len() != 2 {
		t.Fatalf("points a %d b %d c %d, Len %d", points(a), points(b), points(c), s.Len())
	}
	if !s.Delete(a) || points(a) != 0 || points(b) != 2 {
		t.Fatal("deleting the indexed key lost the other one")
	}
	mustAdd(t, s, c, t0, 3)
	mustAdd(t, s, a, t0, 1)
	if points(a) != 1 || points(b) != 2 || points(c) != 1 || s.Len() != 3 {
		t.Fatalf("after re-adding: a %d b %d c %d, Len %d", points(a), points(b), points(c), s.Len())
	}
	if !s.Delete(b) || !s.Delete(c) || !s.Delete(a) || s.Len() != 0 {
		t.Fatal("deleting all failed")
	}
	p := &s.parts[Partition(42, 4)]
	if p.index.len() != 0 || p.spill != nil {
		t.Errorf("index %d entries, spill %v after deleting all", p.index.len(), p.spill)
	}
}

// Each series moves on its own clock: feeding the same points in any
// interleaving of series gives the same state.
func TestInterleaving(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 5))
	keys := []Key{testKey("a"), testKey("b"), testKey("c")}
	per := make([][]point, len(keys))
	for i := range keys {
		ts := int64(t0 + i*13*1000)
		for range 3000 {
			ts += 1 + rng.Int64N(30*sec)
			p := point{ts, rng.NormFloat64()}
			if rng.IntN(8) == 0 {
				p.ts -= rng.Int64N(50 * sec)
			}
			per[i] = append(per[i], p)
		}
	}
	type result struct {
		views  []View
		closes []int
		errs   []int
	}
	run := func(order []int) result {
		s := newStore(t, Config{Partitions: 2})
		next := make([]int, len(keys))
		r := result{closes: make([]int, len(keys)), errs: make([]int, len(keys))}
		for _, i := range order {
			p := per[i][next[i]]
			next[i]++
			if err := s.Add(keys[i], p.ts, p.v, func(*Series) { r.closes[i]++ }); err != nil {
				r.errs[i]++
			}
		}
		for _, k := range keys {
			r.views = append(r.views, viewOf(t, s, k, 0))
		}
		return r
	}
	var seq, alt, random []int
	for i := range keys {
		for range per[i] {
			seq = append(seq, i)
		}
	}
	for j := range per[0] {
		for i := range keys {
			if j < len(per[i]) {
				alt = append(alt, i)
			}
		}
	}
	random = append(random, seq...)
	rng.Shuffle(len(random), func(i, j int) { random[i], random[j] = random[j], random[i] })
	want := run(seq)
	for name, order := range map[string][]int{"alternating": alt, "shuffled": random} {
		got := run(order)
		for i := range keys {
			if !sameView(&got.views[i], &want.views[i]) || got.closes[i] != want.closes[i] || got.errs[i] != want.errs[i] {
				t.Errorf("%s: series %d differs from the sequential feed", name, i)
			}
		}
	}
	if want.views[0].Len() < 100 {
		t.Errorf("only %d composite points", want.views[0].Len())
	}
}

// Many goroutines add to many series at once; the result equals a
// sequential feed. Run with -race.
func TestConcurrentAdd(t *testing.T) {
	const workers, seriesPer, points = 6, 300, 120
	feed := func(s *Store, w int) {
		for j := range points {
			for i := range seriesPer {
				k := testKey(fmt.Sprintf("w%d_s%d", w, i))
				ts := int64(t0 + j*20*1000 + i)
				if err := s.Add(k, ts, float64(i*j%17), func(se *Series) { se.Memo().Evaluated = se.Closed() }); err != nil {
					t.Error(err)
					return
				}
			}
		}
	}
	conc := newStore(t, Config{Partitions: 4})
	var wg sync.WaitGroup
	for w := range workers {
		wg.Go(func() { feed(conc, w) })
	}
	// Readers run alongside.
	for range 2 {
		wg.Go(func() {
			var v View
			for range 200 {
				conc.Do(testKey("w0_s0"), func(se *Series) { se.View(&v, 0) })
				for p := range conc.Partitions() {
					conc.Range(p, func(se *Series) bool { _ = se.Points(); return true })
				}
			}
		})
	}
	wg.Wait()
	seq := newStore(t, Config{Partitions: 4})
	for w := range workers {
		feed(seq, w)
	}
	if conc.Len() != workers*seriesPer || seq.Len() != conc.Len() {
		t.Fatalf("Len %d and %d, want %d", conc.Len(), seq.Len(), workers*seriesPer)
	}
	for w := range workers {
		for i := range seriesPer {
			k := testKey(fmt.Sprintf("w%d_s%d", w, i))
			a, b := viewOf(t, conc, k, 0), viewOf(t, seq, k, 0)
			if !sameView(&a, &b) {
				t.Fatalf("series %s differs", k.Text)
			}
		}
	}
}

func TestIncidents(t *testing.T) {
	s := newStore(t, Config{})
	k := testKey("i")
	mustAdd(t, s, k, t0, 1)
	s.Do(k, func(se *Series) {
		if se.Incident(1, false) != nil {
			t.Error("Incident without create returned one")
		}
		for _, r := range []uint16{1, 2, 3} {
			if inc := se.Incident(r, true); inc.Rule != r || inc.Phase != Quiet {
				t.Errorf("new incident %+v", inc)
			}
		}
		se.Incident(2, true).Phase = Pending
		se.DropIncident(1)
		se.DropIncident(9)
		got := se.Incidents()
		if len(got) != 2 || got[0].Rule != 2 || got[0].Phase != Pending || got[1].Rule != 3 {
			t.Errorf("incidents %+v", got)
		}
	})
}

// A partition's slots grow by a sixteenth at a time, in chunks of at most
// ChunkSize, so slack stays bounded whatever the number of series.
func TestChunkGrowth(t *testing.T) {
	s := newStore(t, Config{Partitions: 1, ChunkSize: 256})
	p := &s.parts[0]
	for i := range 5000 {
		mustAdd(t, s, testKey(fmt.Sprint("g", i)), t0, 1)
		if n := i + 1; p.slots > n+n/16+16+4 { // a sixteenth, a minimum chunk, page rounding
			t.Fatalf("%d series in %d slots", n, p.slots)
		}
	}
	for _, c := range p.chunks {
		if len(c.series) > 256 || len(c.hot) != len(c.series) || len(c.blocks) != len(c.series)*s.cfg.lay.blockBytes {
			t.Fatalf("chunk of %d series, %d hot records, %d bytes of blocks", len(c.series), len(c.hot), len(c.blocks))
		}
	}
}

// growthChunks bounds the chunks a partition makes before they reach
// ChunkSize, which the configuration check counts on.
func TestGrowthChunksBound(t *testing.T) {
	for _, levels := range [][]Level{DefaultLayout(), {{time.Minute, 1}}} {
		for _, size := range []int{1, 16, 1024, maxChunkSize} {
			s := newStore(t, Config{Layout: levels, ChunkSize: size, MaxSeries: 1000})
			slots, small := 0, 0
			for {
				n := min(size, fillPages(max(firstChunk, slots/16), s.cfg.lay.blockBytes))
				if n == size {
					break
				}
				slots += n
				small++
			}
			if small > growthChunks {
				t.Errorf("layout %v, chunk size %d: %d smaller chunks, more than %d", levels, size, small, growthChunks)
			}
		}
	}
}

// The store places a series where Partition says, whatever the count.
func TestPartitionPlacement(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	for _, n := range []int{1, 2, 3, 64, 100} {
		s := newStore(t, Config{Partitions: n})
		for range 1000 {
			h := rng.Uint64()
			if s.part(h) != &s.parts[Partition(h, n)] {
				t.Fatalf("%d partitions: hash %#x misplaced", n, h)
			}
		}
	}
}
