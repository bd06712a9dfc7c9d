package state

import (
	"fmt"
	"runtime"
	"sync/atomic"
	"testing"
)

const benchSeries = 100_000

// benchKeys makes n realistic canonical keys.
func benchKeys(n int) []Key {
	keys := make([]Key, n)
	for i := range keys {
		labels := []Label{
			{Name: []byte("mode"), Value: []byte([]string{"idle", "user", "system", "iowait"}[i%4])},
			{Name: []byte("host"), Value: fmt.Appendf(nil, "node-%05d.dc1", i/32)},
			{Name: []byte("cpu"), Value: fmt.Append(nil, i/4%8)},
		}
		keys[i] = MakeKey(nil, []byte("node_cpu_seconds_total"), labels)
	}
	return keys
}

// benchStep is the spacing of one series' points in the Add benchmarks.
const benchStep = 10 * sec

// primedStore makes n live series, each with one point at its own phase
// within benchStep, so that later rounds close buckets at staggered points.
func primedStore(b *testing.B, n int) ([]Key, *Store, func(int) int64) {
	b.Helper()
	keys := benchKeys(n)
	s := newStore(b, Config{})
	phase := func(j int) int64 { return int64(j) * 7919 % benchStep }
	for j, k := range keys {
		mustAdd(b, s, k, t0+phase(j), 1)
	}
	return keys, s, phase
}

// BenchmarkAdd feeds points round-robin to live series, each on its own
// clock at one point every 10 s (with a per-series phase), so that each
// series closes a one-minute bucket every sixth point. ns/op is per point.
// The 100,000-series case is the target; 1,000 series fit in cache and show
// what the work costs without memory stalls.
func BenchmarkAdd(b *testing.B) {
	for _, n := range []int{benchSeries, 1000} {
		b.Run(fmt.Sprint("series=", n), func(b *testing.B) {
			keys, s, phase := primedStore(b, n)
			b.ReportAllocs()
			b.ResetTimer()
			for i := range b.N {
				j := i % n
				r := int64(i/n) + 1
				if err := s.Add(keys[j], t0+r*benchStep+phase(j), float64(r%50), nil); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}

// BenchmarkAddBatch is BenchmarkAdd through AddBatch, 128 points a batch;
// ns/op is per point.
func BenchmarkAddBatch(b *testing.B) {
	for _, n := range []int{benchSeries, 1000} {
		b.Run(fmt.Sprint("series=", n), func(b *testing.B) {
			keys, s, phase := primedStore(b, n)
			es := make([]Entry, 128)
			j, r := 0, int64(1) // series and round of the next point
			b.ReportAllocs()
			b.ResetTimer()
			for i := 0; i < b.N; i += len(es) {
				batch := es[:min(len(es), b.N-i)]
				for x := range batch {
					batch[x] = Entry{Key: keys[j], TS: t0 + r*benchStep + phase(j), Value: float64(r % 50)}
					if j++; j == n {
						j, r = 0, r+1
					}
				}
				if got := s.AddBatch(batch, nil); got != len(batch) {
					b.Fatalf("%d of %d applied: %v", got, len(batch), firstErr(batch))
				}
			}
		})
	}
}

func firstErr(es []Entry) error {
	for _, e := range es {
		if e.Err != nil {
			return e.Err
		}
	}
	return nil
}

// BenchmarkMakeKey builds the canonical text, FNV-1a hash and check hash
// of a typical key with three labels; fnv-only is the same without the
// check hash, for comparison.
func BenchmarkMakeKey(b *testing.B) {
	metric := []byte("node_cpu_seconds_total")
	labels := []Label{
		{Name: []byte("mode"), Value: []byte("idle")},
		{Name: []byte("host"), Value: []byte("node-00042.dc1")},
		{Name: []byte("cpu"), Value: []byte("3")},
	}
	buf := make([]byte, 0, 128)
	b.Run("check", func(b *testing.B) {
		var k Key
		b.ReportAllocs()
		for range b.N {
			k = MakeKey(buf, metric, labels)
		}
		b.SetBytes(int64(len(k.Text)))
	})
	b.Run("fnv-only", func(b *testing.B) {
		var k Key
		b.ReportAllocs()
		for range b.N {
			text := AppendCanonical(buf[:0], metric, labels)
			k = Key{Hash: Hash(text), Text: text}
		}
		b.SetBytes(int64(len(k.Text)))
	})
}

// BenchmarkAddParallel is BenchmarkAdd from GOMAXPROCS goroutines, each
// owning every GOMAXPROCS-th series.
func BenchmarkAddParallel(b *testing.B) {
	keys, s, phase := primedStore(b, benchSeries)
	var worker atomic.Int64
	g := runtime.GOMAXPROCS(0)
	b.ReportAllocs()
	b.ResetTimer()
	b.RunParallel(func(pb *testing.PB) {
		w := int(worker.Add(1)-1) % g
		i := 0
		for pb.Next() {
			j := w + (i%(benchSeries/g))*g
			r := int64(i/(benchSeries/g)) + 1
			if err := s.Add(keys[j], t0+r*benchStep+phase(j), float64(r%50), nil); err != nil {
				b.Error(err)
				return
			}
			i++
		}
	})
}

// BenchmarkAddBatchParallel is BenchmarkAddParallel through AddBatch, 128
// points a batch; ns/op is per point.
func BenchmarkAddBatchParallel(b *testing.B) {
	keys, s, phase := primedStore(b, benchSeries)
	var worker atomic.Int64
	g := runtime.GOMAXPROCS(0)
	b.ReportAllocs()
	b.ResetTimer()
	b.RunParallel(func(pb *testing.PB) {
		w := int(worker.Add(1)-1) % g
		es := make([]Entry, 0, 128)
		j, r := w, int64(1)
		flush := func() bool {
			if n := s.AddBatch(es, nil); n != len(es) {
				b.Errorf("%d of %d applied: %v", n, len(es), firstErr(es))
				return false
			}
			es = es[:0]
			return true
		}
		for pb.Next() {
			es = append(es, Entry{Key: keys[j], TS: t0 + r*benchStep + phase(j), Value: float64(r % 50)})
			if j += g; j >= benchSeries {
				j, r = w, r+1
			}
			if len(es) == cap(es) && !flush() {
				return
			}
		}
		flush()
	})
}

// BenchmarkView copies 16 days of history of one series into a reused
// View.
func BenchmarkView(b *testing.B) {
	s := newStore(b, Config{Partitions: 1})
	k := testKey(`disk_used_bytes{host="a",mount="/"}`)
	for ts := int64(t0); ts < t0+16*24*hour; ts += 10 * sec {
		mustAdd(b, s, k, ts, 1e12+float64(ts%86_400_000))
	}
	var v View
	fn := func(se *Series) { se.View(&v, 0) }
	s.Do(k, fn)
	b.ReportAllocs()
	b.ResetTimer()
	for range b.N {
		s.Do(k, fn)
	}
	b.ReportMetric(float64(v.Len()), "points")
}

// fillHistory gives a series points in every bucket of every ring ending at
// end: hourly for two weeks, then every 15 minutes for a day, then every
// minute for two hours.
func fillHistory(tb testing.TB, s *Store, k Key, end int64) {
	ts := end - 15*24*hour
	for ; ts < end-25*hour; ts += hour {
		mustAdd(tb, s, k, ts, 1)
	}
	for ; ts < end-3*hour; ts += 15 * minute {
		mustAdd(tb, s, k, ts, 2)
	}
	for ; ts <= end; ts += minute {
		mustAdd(tb, s, k, ts, 3)
	}
}

// BenchmarkBytesPerSeries measures the heap taken by 100,000 series with
// full history in the default configuration, index, key text and slab
// slack included, after a GC. It feeds about 60 million points: run it
// alone with -benchtime=1x.
func BenchmarkBytesPerSeries(b *testing.B) {
	keys := benchKeys(benchSeries)
	var per float64
	var s *Store
	for range b.N {
		s = nil
		var before, after runtime.MemStats
		runtime.GC()
		runtime.ReadMemStats(&before)
		s = newStore(b, Config{})
		for _, k := range keys {
			fillHistory(b, s, k, t0+20*24*hour)
		}
		runtime.GC()
		runtime.ReadMemStats(&after)
		per = float64(int64(after.HeapAlloc)-int64(before.HeapAlloc)) / benchSeries
	}
	if s.Len() != benchSeries {
		b.Fatalf("%d series", s.Len())
	}
	var v View
	s.Do(keys[0], func(se *Series) { se.View(&v, 0) })
	if v.Len() < 500 {
		b.Fatalf("history not full: %d composite points", v.Len())
	}
	b.ReportMetric(per, "B/series")
	b.ReportMetric(float64(s.BytesPerSeries()), "designed-B/series")
}
