package state

import (
	"bufio"
	"bytes"
	"io"
	"math/rand/v2"
	"os"
	"path/filepath"
	"runtime"
	"runtime/debug"
	"testing"
)

// fullStore returns a store of n series in the default layout with full
// history: every bucket of every level holds points. The buckets are
// written into the blocks directly, since feeding two weeks of points
// would take minutes; the hot records and birth buckets are set as that
// history would have left them, so that views work.
func fullStore(b *testing.B, n int) *Store {
	b.Helper()
	s := newStore(b, Config{})
	lay := s.cfg.lay
	rng := rand.New(rand.NewPCG(1, 2))
	born := int64(t0)
	clock := born + 15*24*hour + 37*sec // past every ring's span
	for i, k := range benchKeys(n) {
		mustAdd(b, s, k, born, float64(i))
	}
	for p := range s.Partitions() {
		s.Range(p, func(se *Series) bool {
			h := se.hot()
			h.clock = clock
			h.first = floorDiv(clock-lay.late, lay.width[0])
			h.n[h.first&1], h.sum[h.first&1] = 5, 2.5
			h.n[(h.first+1)&1], h.sum[(h.first+1)&1] = 3, -1
			blk := se.ch.block(int(se.row))
			hd := blk.header()
			for l := range hd.coarse[:lay.n-1] {
				hd.coarse[l] = acc{n: float64(10 * (l + 1)), sum: rng.NormFloat64()}
			}
			hd.points = 1 << 20
			for l := range lay.n {
				r := blk.ring(lay, l)
				for j := range lay.count[l] {
					m, c := r.at(j)
					*m, *c = float32(rng.NormFloat64()), uint16(1+rng.IntN(900))
				}
			}
			se.memo.Evaluated = clock
			return true
		})
	}
	return s
}

// fullSnapshot returns the snapshot of fullStore(n), leaving the store to
// the collector.
func fullSnapshot(b *testing.B, n int) []byte {
	b.Helper()
	s := fullStore(b, n)
	var buf bytes.Buffer
	buf.Grow(n * (s.cfg.lay.blockBytes + 300))
	if err := s.WriteSnapshot(&buf, []byte("seq 1")); err != nil {
		b.Fatal(err)
	}
	var v View
	s.Do(benchKeys(1)[0], func(se *Series) { se.View(&v, 0) })
	if v.Len() < 500 {
		b.Fatalf("full series has %d buckets in its view", v.Len())
	}
	return buf.Bytes()
}

// BenchmarkWriteSnapshot writes 100,000 series with full history to
// io.Discard: MB/s of snapshot and ns per series.
func BenchmarkWriteSnapshot(b *testing.B) {
	s := fullStore(b, benchSeries)
	cw := &countWriter{}
	if err := s.WriteSnapshot(cw, nil); err != nil {
		b.Fatal(err)
	}
	b.SetBytes(cw.n)
	b.ReportAllocs()
	b.ResetTimer()
	for range b.N {
		if err := s.WriteSnapshot(io.Discard, nil); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N*benchSeries), "ns/series")
}

type countWriter struct{ n int64 }

func (w *countWriter) Write(p []byte) (int, error) {
	w.n += int64(len(p))
	return len(p), nil
}

// BenchmarkRestore restores 100,000 series with full history from memory.
// In fresh-memory, the heap is returned to the system before each restore,
// as in a process just started, so the restore faults in all the memory
// of the new store, about 350 MB; in reused-memory it gets the pages of
// the store of the previous round, already mapped, which shows what the
// decoding itself costs.
func BenchmarkRestore(b *testing.B) {
	snap := fullSnapshot(b, benchSeries)
	benchRestore(b, int64(len(snap)), func() io.Reader { return bytes.NewReader(snap) }, func() {})
}

// BenchmarkRestoreFile is a restart: the snapshot is read from a file,
// in the page cache as after a recent write, through bufio; the sub-runs
// are those of BenchmarkRestore.
func BenchmarkRestoreFile(b *testing.B) {
	snap := fullSnapshot(b, benchSeries)
	path := filepath.Join(b.TempDir(), "state.snapshot")
	if err := os.WriteFile(path, snap, 0o600); err != nil {
		b.Fatal(err)
	}
	size := int64(len(snap))
	snap = nil
	var f *os.File
	open := func() io.Reader {
		var err error
		if f, err = os.Open(path); err != nil {
			b.Fatal(err)
		}
		return bufio.NewReaderSize(f, 1<<20)
	}
	benchRestore(b, size, open, func() { f.Close() })
}

func benchRestore(b *testing.B, size int64, open func() io.Reader, done func()) {
	for _, fresh := range []bool{true, false} {
		name := "reused-memory"
		if fresh {
			name = "fresh-memory"
		}
		b.Run(name, func(b *testing.B) {
			var s *Store
			b.SetBytes(size)
			b.ReportAllocs()
			for range b.N {
				b.StopTimer()
				s = nil
				if fresh {
					debug.FreeOSMemory()
				} else {
					runtime.GC()
				}
				b.StartTimer()
				var err error
				s, _, err = Restore(Config{}, open())
				done()
				if err != nil || s.Len() != benchSeries {
					b.Fatal(err)
				}
			}
			b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N*benchSeries), "ns/series")
		})
	}
}
