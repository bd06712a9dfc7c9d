package state

import (
	"errors"
	"fmt"
	"math"
	"runtime"
	"sync"
	"testing"
	"time"
)

// smallLayout keeps churn tests light: one level of ten one-minute
// buckets, a 128-byte block per series.
var smallLayout = []Level{{time.Minute, 10}}

// slotsOf returns the slots allocated over all partitions of s.
func slotsOf(s *Store) int {
	n := 0
	for i := range s.parts {
		p := &s.parts[i]
		p.mu.Lock()
		n += p.slots
		p.mu.Unlock()
	}
	return n
}

// indexed returns the entries of the indexes and spill maps of s.
func indexed(s *Store) int {
	n := 0
	for i := range s.parts {
		p := &s.parts[i]
		p.mu.Lock()
		n += p.index.len() + len(p.spill)
		p.mu.Unlock()
	}
	return n
}

// expireAll calls Expire until one call has made a full pass (a call does
// at most one), and returns the series removed.
func expireAll(s *Store, now int64) int {
	n := 0
	for range 1 + len(s.parts) + slotsOf(s)/sweepMin + 1 {
		n += s.Expire(now)
	}
	return n
}

func TestExpireConfig(t *testing.T) {
	cases := []struct {
		d  time.Duration
		ok bool
	}{
		{0, true},
		{time.Millisecond, true},
		{time.Duration(math.MaxInt64) / time.Millisecond * time.Millisecond, true},
		{-time.Minute, false},
		{time.Millisecond + time.Microsecond, false},
	}
	for _, c := range cases {
		_, err := New(Config{IdleExpiry: c.d})
		if (err == nil) != c.ok {
			t.Errorf("IdleExpiry %v: err %v, want ok=%v", c.d, err, c.ok)
		}
	}
}

// A series "idle" has its last point at idleAt; "busy" at busyAt moves the
// store's newest point. Expire(now) must remove idle exactly when it lags
// min(now, newest) by more than the expiry.
func TestExpireEdges(t *testing.T) {
	const after = 10 * minute
	longest := time.Duration(math.MaxInt64) / time.Millisecond * time.Millisecond
	cases := []struct {
		name   string
		expiry time.Duration
		idleAt int64
		busyAt int64
		now    int64
		gone   bool
	}{
		{"no expiry never removes", 0, t0, t0 + 1000*hour, math.MaxInt64, false},
		{"exactly at the boundary stays", time.Duration(after) * time.Millisecond, t0, t0 + after, math.MaxInt64, false},
		{"one ms past the boundary goes", time.Duration(after) * time.Millisecond, t0, t0 + after + 1, math.MaxInt64, true},
		{"now caps the reference: stays", time.Duration(after) * time.Millisecond, t0, t0 + hour, t0 + after, false},
		{"now caps the reference: goes", time.Duration(after) * time.Millisecond, t0, t0 + hour, t0 + after + 1, true},
		{"wall time far ahead of the data changes nothing", time.Duration(after) * time.Millisecond, t0, t0 + after, t0 + 1000*hour, false},
		{"now before every point", time.Duration(after) * time.Millisecond, t0, t0 + hour, math.MinInt64, false},
		{"now at the oldest accepted time", time.Duration(after) * time.Millisecond, -maxAbsTime, t0, -maxAbsTime, false},
		{"timestamps before 1970", time.Duration(after) * time.Millisecond, -hour - after - 1, -hour, math.MaxInt64, true},
		{"extremes of the time range", longest, -maxAbsTime, maxAbsTime, math.MaxInt64, true},
		{"longest expiry at its boundary", longest, maxAbsTime - longest.Milliseconds(), maxAbsTime, math.MaxInt64, false},
		{"longest expiry past its boundary", longest, maxAbsTime - longest.Milliseconds() - 1, maxAbsTime, math.MaxInt64, true},
		{"a series ahead of now stays", time.Duration(after) * time.Millisecond, t0 + hour, t0 + hour, t0, false},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			s := newStore(t, Config{Layout: smallLayout, IdleExpiry: c.expiry})
			idle, busy := testKey("idle"), testKey("busy")
			mustAdd(t, s, idle, c.idleAt, 1)
			mustAdd(t, s, busy, c.busyAt, 1)
			want := 0
			if c.gone {
				want = 1
			}
			if got := expireAll(s, c.now); got != want {
				t.Errorf("Expire removed %d, want %d", got, want)
			}
			if got := s.Do(idle, func(*Series) {}); got == c.gone {
				t.Errorf("idle series present %v, want %v", got, !c.gone)
			}
			if !s.Do(busy, func(*Series) {}) {
				t.Error("busy series removed")
			}
			if s.Len() != 2-want || indexed(s) != s.Len() {
				t.Errorf("Len %d, indexed %d, want %d", s.Len(), indexed(s), 2-want)
			}
		})
	}
}

// Refused points do not move the store's newest time, and an empty store
// has nothing to expire.
func TestExpireRefusedPoints(t *testing.T) {
	s := newStore(t, Config{Layout: smallLayout, IdleExpiry: time.Minute})
	if n := s.Expire(math.MaxInt64); n != 0 {
		t.Fatalf("empty store: removed %d", n)
	}
	far := testKey("far")
	mustAdd(t, s, testKey("a"), t0, 1)
	mustAdd(t, s, far, t0, math.MaxFloat64)
	refused := []struct {
		k    Key
		ts   int64
		v    float64
		want error
	}{
		{testKey("b"), t0 + hour, math.NaN(), ErrValue},
		{far, t0 + hour, -math.MaxFloat64, ErrValue}, // refused by the series, after its lookup
		{far, maxAbsTime + 1, 1, ErrTime},
	}
	for _, r := range refused {
		if err := s.Add(r.k, r.ts, r.v, nil); !errors.Is(err, r.want) {
			t.Fatalf("Add(%s, %d, %v): %v, want %v", r.k.Text, r.ts, r.v, err, r.want)
		}
	}
	mustAdd(t, s, testKey("c"), t0+minute, 1)
	if n := expireAll(s, math.MaxInt64); n != 0 || s.Len() != 3 {
		t.Errorf("removed %d, Len %d: a refused point moved the reference", n, s.Len())
	}
}

// Many series come and go, never more than MaxSeries alive at once: with
// expiry every new series is accepted, the live count stays between the
// series that must be kept and the limit, slots stop growing once the
// churn is steady and so does the heap.
func TestExpireChurn(t *testing.T) {
	const (
		perStep  = 1500 // new series a minute
		life     = 4    // minutes a series sends points
		idle     = 3    // IdleExpiry in minutes
		calls    = 10   // Expire calls a minute
		maxLive  = 20_000
		warmStep = 20
	)
	total := 200_000
	if testing.Short() {
		total = 60_000
	}
	steps := total / perStep
	s := newStore(t, Config{Layout: smallLayout, Partitions: 16, ChunkSize: 256, MaxSeries: maxLive, IdleExpiry: idle * time.Minute})
	keyOf := func(id int) Key {
		return MakeKey(nil, []byte("churn"), []Label{{Name: []byte("id"), Value: fmt.Append(nil, id)}})
	}
	var cohorts [life][]Key
	var warmHeap uint64
	var warmSlots, removed int
	for step := range steps {
		c := make([]Key, perStep)
		for i := range c {
			c[i] = keyOf(step*perStep + i)
		}
		cohorts[step%life] = c
		now := t0 + int64(step)*minute
		for _, c := range cohorts {
			for i, k := range c {
				if err := s.Add(k, now+int64(i)%minute, float64(i), nil); err != nil {
					t.Fatalf("step %d: %v", step, err)
				}
			}
		}
		for range calls {
			removed += s.Expire(now + minute)
		}
		// Series whose last point is less than idle-1 minutes behind the
		// newest must stay: those born in the last life+idle-1 minutes.
		keep := min(step+1, life+idle-1) * perStep
		if n := s.Len(); n < keep || n > maxLive {
			t.Fatalf("step %d: %d live, want within [%d, %d]", step, n, keep, maxLive)
		}
		if step == warmStep {
			warmHeap, warmSlots = heapInUse(), slotsOf(s)
		}
	}
	created := steps * perStep
	if removed != created-s.Len() {
		t.Errorf("removed %d, created %d, live %d", removed, created, s.Len())
	}
	if n := indexed(s); n != s.Len() {
		t.Errorf("%d indexed, %d live", n, s.Len())
	}
	slots, heap := slotsOf(s), heapInUse()
	grew := int64(heap) - int64(warmHeap)
	// Without reuse, each series created after the warm-up would have
	// taken a slot: about BytesPerSeries each.
	noReuse := (created - (warmStep+1)*perStep) * s.BytesPerSeries()
	t.Logf("%d series created, %d live, %d slots (%d at step %d); heap in use %d kB, %+d kB since step %d (without reuse about %+d kB)",
		created, s.Len(), slots, warmSlots, warmStep, heap>>10, grew>>10, warmStep, noReuse>>10)
	if slots > maxLive*5/4 || slots > warmSlots*5/4 {
		t.Errorf("%d slots for at most %d live series (%d after warm-up)", slots, maxLive, warmSlots)
	}
	if grew > 4<<20 || grew > int64(noReuse)/8 {
		t.Errorf("heap grew by %d bytes after warm-up", grew)
	}
}

func heapInUse() uint64 {
	runtime.GC()
	var m runtime.MemStats
	runtime.ReadMemStats(&m)
	return m.HeapInuse
}

// At the series limit new series are refused until expiry frees room,
// and the freed slots are reused rather than new ones allocated.
func TestExpireSeriesCap(t *testing.T) {
	const limit = 100
	s := newStore(t, Config{Layout: smallLayout, Partitions: 4, MaxSeries: limit, IdleExpiry: 10 * time.Minute})
	key := func(i int) Key { return testKey(fmt.Sprint("cap", i)) }
	for i := range limit {
		mustAdd(t, s, key(i), t0, 1)
	}
	if err := s.Add(key(limit), t0, 1, nil); !errors.Is(err, ErrSeriesCap) {
		t.Fatalf("series beyond the limit: %v", err)
	}
	slots := slotsOf(s)
	// Ten series go on; the others fall idle.
	for i := range 10 {
		mustAdd(t, s, key(i), t0+hour, 1)
	}
	if err := s.Add(key(limit), t0+hour, 1, nil); !errors.Is(err, ErrSeriesCap) {
		t.Fatalf("limit before expiry: %v", err)
	}
	if n := expireAll(s, math.MaxInt64); n != limit-10 {
		t.Fatalf("removed %d, want %d", n, limit-10)
	}
	for i := limit; i < 2*limit-10; i++ {
		mustAdd(t, s, key(i), t0+hour, 1)
	}
	if err := s.Add(key(2*limit), t0+hour, 1, nil); !errors.Is(err, ErrSeriesCap) {
		t.Errorf("limit after refilling: %v", err)
	}
	if got := slotsOf(s); got != slots {
		t.Errorf("%d slots after refilling, %d before", got, slots)
	}
}

// A series that returns after expiry is a new series: nothing of its old
// history, memo or incidents is left, and it may start before its old clock.
func TestExpireReturningSeries(t *testing.T) {
	s := newStore(t, Config{Layout: smallLayout, IdleExpiry: 10 * time.Minute})
	k, other := testKey("back"), testKey("other")
	for m := range int64(31) {
		mustAdd(t, s, k, t0+m*minute, float64(m))
	}
	s.Do(k, func(se *Series) {
		se.Memo().Evaluated = t0
		se.Incident(3, true).Phase = Open
	})
	mustAdd(t, s, other, t0+2*hour, 1)
	slots := slotsOf(s)
	if n := expireAll(s, math.MaxInt64); n != 1 {
		t.Fatalf("removed %d, want 1", n)
	}
	if s.Do(k, func(*Series) {}) {
		t.Fatal("expired series still found")
	}
	mustAdd(t, s, k, t0+5*minute, 42) // before its old clock: not late for a new series
	s.Do(k, func(se *Series) {
		if se.Key() != "back" || se.Points() != 1 || se.Newest() != t0+5*minute || se.Closed() != 0 {
			t.Errorf("returned series: key %q, %d points, newest %d, closed %d", se.Key(), se.Points(), se.Newest(), se.Closed())
		}
		if *se.Memo() != (Memo{}) || len(se.Incidents()) != 0 {
			t.Errorf("returned series kept memo %+v, incidents %v", *se.Memo(), se.Incidents())
		}
	})
	if v := viewOf(t, s, k, 0); len(v.T) != 0 {
		t.Errorf("returned series has %d closed buckets", len(v.T))
	}
	if got := slotsOf(s); got != slots {
		t.Errorf("%d slots, %d before", got, slots)
	}
	if s.Len() != 2 || indexed(s) != 2 {
		t.Errorf("Len %d, indexed %d", s.Len(), indexed(s))
	}
}

// One call visits a bounded share of the store, resuming where the last
// stopped, and a series whose hash collides with another's (kept in the
// spill map) expires like any other.
func TestExpireIncremental(t *testing.T) {
	n := 20_000
	if testing.Short() {
		n = 5_000
	}
	s := newStore(t, Config{Layout: smallLayout, Partitions: 4, IdleExpiry: time.Minute})
	for i := range n {
		mustAdd(t, s, testKey(fmt.Sprint("inc", i)), t0, 1)
	}
	// Same hash as a live series, other text.
	clash := Key{Hash: testKey("inc0").Hash, Text: []byte("clash")}
	mustAdd(t, s, clash, t0, 1)
	mustAdd(t, s, testKey("inc1"), t0+hour, 1)
	calls, removed := 0, 0
	for s.Len() > 1 {
		got := s.Expire(math.MaxInt64)
		if budget := max(sweepMin, (s.Len()+got)/sweepShare); got > budget {
			t.Fatalf("one call removed %d, more than its budget of %d slots", got, budget)
		}
		removed += got
		if calls++; calls > 2*(n/sweepMin+1)+len(s.parts) {
			t.Fatalf("%d live after %d calls", s.Len(), calls)
		}
	}
	if removed != n || indexed(s) != 1 || !s.Do(testKey("inc1"), func(*Series) {}) {
		t.Errorf("removed %d of %d, %d indexed", removed, n, indexed(s))
	}
}

// Expire runs alongside ingest without races, and the store stays
// consistent: every live series is indexed and found, and Len counts them.
func TestExpireConcurrent(t *testing.T) {
	rounds := 200
	if testing.Short() {
		rounds = 50
	}
	s := newStore(t, Config{Layout: smallLayout, Partitions: 8, ChunkSize: 64, IdleExpiry: 2 * time.Minute})
	var wg sync.WaitGroup
	for w := range 4 {
		wg.Go(func() {
			// Each round, ten series send a point; each lives for three
			// rounds. Odd workers go through AddBatch.
			var es []Entry
			for r := range rounds {
				es = es[:0]
				for life := range min(r+1, 3) {
					for i := range 10 {
						k := testKey(fmt.Sprint("w", w, "/", (r-life)*10+i))
						es = append(es, Entry{Key: k, TS: t0 + int64(r)*minute, Value: 1})
					}
				}
				if w%2 == 1 {
					s.AddBatch(es, nil)
				} else {
					for i := range es {
						es[i].Err = s.Add(es[i].Key, es[i].TS, es[i].Value, nil)
					}
				}
				if err := firstErr(es); err != nil {
					t.Error(err)
					return
				}
			}
		})
	}
	stop := make(chan struct{})
	var ex sync.WaitGroup
	var removed int
	ex.Go(func() {
		for {
			select {
			case <-stop:
				return
			default:
				removed += s.Expire(math.MaxInt64)
				runtime.Gosched()
			}
		}
	})
	wg.Wait()
	close(stop)
	ex.Wait()
	t.Logf("%d series removed during ingest", removed)
	live := 0
	for part := range s.Partitions() {
		var keys []Key
		newest := map[string]int64{}
		s.Range(part, func(se *Series) bool {
			keys = append(keys, testKey(se.Key()))
			newest[se.Key()] = se.Newest()
			return true
		})
		for _, k := range keys {
			if !s.Do(k, func(se *Series) {
				if se.Newest() != newest[string(k.Text)] {
					t.Errorf("%s: Do sees clock %d, Range %d", k.Text, se.Newest(), newest[string(k.Text)])
				}
			}) {
				t.Errorf("%s visited by Range but not found", k.Text)
			}
		}
		live += len(keys)
	}
	if live != s.Len() || indexed(s) != live {
		t.Errorf("Range visits %d, Len %d, indexed %d", live, s.Len(), indexed(s))
	}
	// After a full pass only the series of the last five rounds are left:
	// three sending, two idle for at most the expiry.
	expireAll(s, math.MaxInt64)
	if most := 4 * 10 * 5; s.Len() > most {
		t.Errorf("%d live after a full pass, want at most %d", s.Len(), most)
	}
}

func ExampleStore_Expire() {
	store, err := New(Config{IdleExpiry: 30 * time.Minute})
	if err != nil {
		panic(err)
	}
	const t = 1_700_000_000_000 // unix ms
	orders := MakeKey(nil, []byte("queue_depth"), []Label{{Name: []byte("queue"), Value: []byte("orders")}})
	retired := MakeKey(nil, []byte("queue_depth"), []Label{{Name: []byte("queue"), Value: []byte("retired")}})
	store.Add(retired, t, 5, nil)
	for m := int64(0); m <= 45; m += 15 {
		store.Add(orders, t+m*60_000, 7, nil)
	}
	// The retired queue has been silent for 45 minutes of event time. The
	// pipeline would pass the wall clock, which only caps the reference.
	fmt.Println(store.Expire(math.MaxInt64), store.Len())
	// Output: 1 1
}

// cursorPos returns the position of the sweep cursor of s among the
// slots handed out in all partitions, and their number; s must be quiet.
func cursorPos(s *Store) (pos, slots int) {
	e := &s.exp
	for i := range s.parts {
		p := &s.parts[i]
		for k, c := range p.chunks {
			if i < e.part || i == e.part && k < e.chunk {
				pos += c.used
			} else if i == e.part && k == e.chunk {
				pos += e.row
			}
			slots += c.used
		}
	}
	return pos, slots
}

// BenchmarkExpire measures sweeps over 100,000 series. keep: none idle, op
// is one Expire call; remove: all idle but one, removed over about one
// pass, op is one series removed. ns/series is per slot visited (keep) or
// per series removed (remove).
func BenchmarkExpire(b *testing.B) {
	const n = benchSeries
	keys := benchKeys(n)
	fill := func(s *Store, ts int64) {
		for _, k := range keys {
			if err := s.Add(k, ts, 1, nil); err != nil {
				b.Fatal(err)
			}
		}
	}
	b.Run("keep", func(b *testing.B) {
		s := newStore(b, Config{Layout: smallLayout, IdleExpiry: time.Hour})
		fill(s, t0)
		visited := 0
		for b.Loop() {
			from, slots := cursorPos(s)
			b.StopTimer()
			b.StartTimer()
			if s.Expire(math.MaxInt64) != 0 {
				b.Fatal("removed a live series")
			}
			b.StopTimer()
			to, _ := cursorPos(s)
			visited += (to - from + slots) % slots
			b.StartTimer()
		}
		b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(visited), "ns/series")
		b.ReportMetric(float64(visited)/float64(b.N), "series/op")
	})
	b.Run("remove", func(b *testing.B) {
		s := newStore(b, Config{Layout: smallLayout, IdleExpiry: time.Hour})
		busy := testKey("busy")
		removed, calls := 0, 0
		b.ResetTimer()
		for removed < b.N {
			b.StopTimer()
			fill(s, t0)
			mustAdd(b, s, busy, t0+2*hour, 1)
			b.StartTimer()
			for s.Len() > 1 {
				removed += s.Expire(math.MaxInt64)
				calls++
			}
		}
		ns := float64(b.Elapsed().Nanoseconds())
		b.ReportMetric(ns/float64(removed), "ns/series")
		b.ReportMetric(ns/float64(calls)/1e3, "µs/call")
		b.ReportMetric(0, "ns/op")
	})
}

// BenchmarkAddIdleExpiry is BenchmarkAdd's 100,000-series case with
// IdleExpiry set, for the cost of keeping each partition's newest time.
func BenchmarkAddIdleExpiry(b *testing.B) {
	for _, d := range []time.Duration{0, time.Hour} {
		b.Run(fmt.Sprint("expiry=", d), func(b *testing.B) {
			keys := benchKeys(benchSeries)
			s := newStore(b, Config{IdleExpiry: d})
			phase := func(j int) int64 { return int64(j) * 7919 % benchStep }
			for j, k := range keys {
				mustAdd(b, s, k, t0+phase(j), 1)
			}
			b.ReportAllocs()
			b.ResetTimer()
			for i := range b.N {
				j := i % benchSeries
				r := int64(i/benchSeries) + 1
				if err := s.Add(keys[j], t0+r*benchStep+phase(j), float64(r%50), nil); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}

// ExpireAll removes in one call every idle series, wherever earlier
// sweeps stopped and however the slots are laid out: two stores with the
// same series, one of them with holes left by deletions, lose the same
// ones.
func TestExpireAll(t *testing.T) {
	build := func(holes bool) *Store {
		s := newStore(t, Config{Layout: smallLayout, Partitions: 4, IdleExpiry: time.Hour})
		for i := range 5_000 {
			if holes && i%3 == 0 {
				mustAdd(t, s, testKey(fmt.Sprint("gone", i)), t0, 1)
			}
			ts := t0 + int64(i%7)*hour // every seventh series is newest
			mustAdd(t, s, testKey(fmt.Sprint("s", i)), ts, 1)
		}
		if holes {
			for i := 0; i < 5_000; i += 3 {
				s.Delete(testKey(fmt.Sprint("gone", i)))
			}
			s.Expire(math.MaxInt64) // leaves the cursor part of the way
		}
		return s
	}
	if n := build(false).ExpireAll(math.MinInt64); n != 0 {
		t.Errorf("a reference before every point removed %d", n)
	}
	a, b := build(false), build(true)
	// Newest is t0+6h, so with an hour's expiry the series whose clock is
	// before t0+5h go: i%7 < 5.
	want := countBelow(5_000, 7, 5)
	if n := a.ExpireAll(math.MaxInt64); n != want {
		t.Errorf("removed %d, want %d", n, want)
	}
	b.ExpireAll(math.MaxInt64)
	for i := range 5_000 {
		k := testKey(fmt.Sprint("s", i))
		if ina, inb := a.Do(k, func(*Series) {}), b.Do(k, func(*Series) {}); ina != inb || ina != (i%7 >= 5) {
			t.Fatalf("series %d: kept %v and %v", i, ina, inb)
		}
	}
	if a.Len() != b.Len() {
		t.Errorf("%d and %d series left", a.Len(), b.Len())
	}
	// now caps the reference: at t0+5h the cutoff is t0+4h, so i%7 < 4 go.
	if n := build(false).ExpireAll(t0 + 5*hour); n != countBelow(5_000, 7, 4) {
		t.Errorf("capped at t0+5h: removed %d, want %d", n, countBelow(5_000, 7, 4))
	}
}

// countBelow counts the i in [0, n) with i%mod < below.
func countBelow(n, mod, below int) int {
	c := 0
	for i := range n {
		if i%mod < below {
			c++
		}
	}
	return c
}
