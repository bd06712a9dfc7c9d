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

// closeCall is what an onClose callback saw.
type closeCall struct {
	key    string
	closed int64
	points uint64
}

// feedScenario makes random points over keys: mostly in order per series
// with jitter, some late beyond the lateness, some far ahead, a few with
// bad values or timestamps, and series appearing as it goes.
func feedScenario(rng *rand.Rand, keys []Key, n int) []Entry {
	clock := make([]int64, len(keys))
	for i := range clock {
		clock[i] = t0 + rng.Int64N(minute)
	}
	es := make([]Entry, n)
	for i := range es {
		// New series come in as the feed goes on; earlier ones are more
		// frequent, so a batch often holds several points of one series.
		j := rng.IntN(1 + min(len(keys)-1, i/4))
		if rng.IntN(3) == 0 {
			j = rng.IntN(1 + min(len(keys)-1, i/4)/4)
		}
		clock[j] += rng.Int64N(25 * sec)
		e := Entry{Key: keys[j], TS: clock[j], Value: rng.NormFloat64()*10 + float64(j)}
		switch rng.IntN(40) {
		case 0:
			e.TS -= 2*minute + rng.Int64N(5*minute) // late
		case 1:
			clock[j] += rng.Int64N(2 * hour) // a jump that closes many buckets
			e.TS = clock[j]
		case 2:
			e.Value = math.NaN()
		case 3:
			e.TS = 1<<53 + 1
		case 4:
			e.Value = math.Inf(-1)
		}
		es[i] = e
	}
	return es
}

// AddBatch gives the same errors, callbacks and state as Add called for
// each entry in order, whatever the batch size: with several points of a
// series in one batch, late and refused points, new series, the series
// limit reached inside a batch, keys sharing a hash and keys without a
// check hash.
func TestAddBatchSameAsAdd(t *testing.T) {
	cases := []struct {
		name string
		cfg  Config
		keys int
	}{
		{"one partition", Config{Partitions: 1, ChunkSize: 16, MaxSeries: 10000}, 200},
		{"default", Config{}, 500},
		{"odd partitions, four open buckets", Config{Partitions: 7, Lateness: 150 * time.Second}, 300},
		{"series limit", Config{Partitions: 4, MaxSeries: 60}, 200},
	}
	for ci, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			rng := rand.New(rand.NewPCG(uint64(ci), 99))
			keys := make([]Key, c.keys)
			for i := range keys {
				switch {
				case i%50 == 7: // shares the hash of key i-1
					keys[i] = Key{Hash: keys[i-1].Hash, Text: fmt.Appendf(nil, "clash_%d", i)}
				case i%3 == 0: // no check hash: the store computes it
					keys[i] = testKey(fmt.Sprintf(`m{i="%d"}`, i))
				default:
					keys[i] = MakeKey(nil, []byte("m"), []Label{{Name: []byte("i"), Value: fmt.Append(nil, i)}})
				}
			}
			feed := feedScenario(rng, keys, 20000)

			ref := newStore(t, c.cfg)
			var want []closeCall
			wantErr := make([]error, len(feed))
			record := func(calls *[]closeCall) func(*Series) {
				return func(se *Series) { *calls = append(*calls, closeCall{se.Key(), se.Closed(), se.Points()}) }
			}
			for i, e := range feed {
				wantErr[i] = ref.Add(e.Key, e.TS, e.Value, record(&want))
			}
			for _, size := range []int{1, 7, 32, 33, 128, 1000} {
				s := newStore(t, c.cfg)
				var got []closeCall
				es := append([]Entry(nil), feed...)
				applied := 0
				for i := 0; i < len(es); i += size {
					applied += s.AddBatch(es[i:min(i+size, len(es))], record(&got))
				}
				okCount := 0
				for i, e := range es {
					if (e.Err == nil) != (wantErr[i] == nil) || e.Err != nil && e.Err.Error() != wantErr[i].Error() {
						t.Fatalf("batch %d, entry %d: err %v, want %v", size, i, e.Err, wantErr[i])
					}
					if e.Err == nil {
						okCount++
					}
				}
				if applied != okCount {
					t.Errorf("batch %d: applied %d, %d entries without error", size, applied, okCount)
				}
				if len(got) != len(want) {
					t.Fatalf("batch %d: %d onClose calls, want %d", size, len(got), len(want))
				}
				for i := range got {
					if got[i] != want[i] {
						t.Fatalf("batch %d: onClose call %d saw %+v, want %+v", size, i, got[i], want[i])
					}
				}
				if s.Len() != ref.Len() {
					t.Fatalf("batch %d: %d series, want %d", size, s.Len(), ref.Len())
				}
				for _, k := range keys {
					var a, b View
					okA := s.Do(k, func(se *Series) { se.View(&a, 0) })
					okB := ref.Do(k, func(se *Series) { se.View(&b, 0) })
					if okA != okB || !sameView(&a, &b) {
						t.Fatalf("batch %d: series %s differs", size, k.Text)
					}
				}
			}
			kinds := map[error]int{}
			for _, err := range wantErr {
				for _, kind := range []error{ErrLate, ErrValue, ErrTime, ErrSeriesCap} {
					if errors.Is(err, kind) {
						kinds[kind]++
					}
				}
			}
			if len(want) < 100 || kinds[ErrLate] == 0 || kinds[ErrValue] == 0 || kinds[ErrTime] == 0 ||
				(c.cfg.MaxSeries > 0 && c.cfg.MaxSeries < c.keys) != (kinds[ErrSeriesCap] > 0) {
				t.Errorf("scenario too tame: %d closes, errors %v", len(want), kinds)
			}
		})
	}
}

// Batches from many goroutines, alongside deletions and readers, give the
// state a sequential feed gives. Run with -race; without it, the lock-free
// prefetch reads run against concurrent writers, table growth and slot
// reuse.
func TestConcurrentAddBatch(t *testing.T) {
	const workers, seriesPer, rounds = 4, 400, 60
	key := func(w, i int) Key {
		return MakeKey(nil, []byte("c"), []Label{{Name: []byte("w"), Value: fmt.Append(nil, w)}, {Name: []byte("i"), Value: fmt.Append(nil, i)}})
	}
	feed := func(s *Store, w int) {
		es := make([]Entry, 0, 50)
		for r := range rounds {
			for i := range seriesPer {
				es = append(es, Entry{Key: key(w, i), TS: int64(t0 + r*20*1000 + i), Value: float64(i * r % 13)})
				if len(es) == cap(es) {
					if n := s.AddBatch(es, func(se *Series) { se.Memo().Evaluated = se.Closed() }); n != len(es) {
						t.Errorf("%d of %d applied: %v", n, len(es), firstErr(es))
						return
					}
					es = es[:0]
				}
			}
		}
	}
	conc := newStore(t, Config{Partitions: 8, ChunkSize: 64})
	var wg sync.WaitGroup
	for w := range workers {
		wg.Go(func() { feed(conc, w) })
	}
	// Series that come and go, so slots are freed and reused under the
	// prefetching.
	wg.Go(func() {
		for r := range 3000 {
			k := testKey(fmt.Sprint("churn", r%97))
			if r%2 == 0 {
				_ = conc.Add(k, t0, 1, nil)
			} else {
				conc.Delete(k)
			}
		}
	})
	wg.Go(func() {
		var v View
		for range 100 {
			conc.Do(key(0, 0), func(se *Series) { se.View(&v, 0) })
			for p := range conc.Partitions() {
				conc.Range(p, func(se *Series) bool { _ = se.Points(); return true })
			}
		}
	})
	wg.Wait()
	seq := newStore(t, Config{Partitions: 8, ChunkSize: 64})
	for w := range workers {
		feed(seq, w)
	}
	for w := range workers {
		for i := range seriesPer {
			k := key(w, i)
			a, b := viewOf(t, conc, k, 0), viewOf(t, seq, k, 0)
			if !sameView(&a, &b) {
				t.Fatalf("series %s differs", k.Text)
			}
		}
	}
}

// A finest bucket takes at most 2^32-1 points of one series; the next is
// refused and changes nothing, whether or not it would close buckets.
func TestBucketFull(t *testing.T) {
	s := newStore(t, Config{Partitions: 1, Lateness: 30 * time.Second})
	k := testKey("full")
	mustAdd(t, s, k, t0+10*sec, 1)
	fill := func() {
		ref, ok := s.parts[0].lookup(Key{Hash: k.Hash, Text: k.Text, Check: checkHash(k.Text)})
		if !ok {
			t.Fatal("series missing")
		}
		c, row := s.parts[0].at(ref)
		n, _ := c.slot(row, floorDiv(t0, minute))
		*n = math.MaxUint32
	}
	state := func() (int64, uint64) {
		var clock int64
		var points uint64
		s.Do(k, func(se *Series) { clock, points = se.Newest(), se.Points() })
		return clock, points
	}
	fill()
	clock, points := state()
	for _, ts := range []int64{t0 + 5*sec, t0 + 20*sec, t0 + 40*sec} { // the last one would close bucket t0-1min
		closes := 0
		if err := s.Add(k, ts, 2, func(*Series) { closes++ }); !errors.Is(err, ErrFull) || closes != 0 {
			t.Errorf("point at %d: %v, %d closes; want ErrFull and none", ts, err, closes)
		}
		if c, p := state(); c != clock || p != points {
			t.Errorf("point at %d changed clock %d→%d, points %d→%d", ts, clock, c, points, p)
		}
	}
	mustAdd(t, s, k, t0+minute+40*sec, 3) // the next bucket takes points, and closes the full one
	v := viewOf(t, s, k, 0)
	if v.Len() != 1 || v.N[0] != math.MaxUint16 || v.Y[0] != 1 {
		t.Errorf("full bucket closed as Y %v N %v", v.Y, v.N)
	}
}
