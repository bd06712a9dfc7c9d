package stream_test

import (
	"fmt"
	"math"
	"runtime"
	"strings"
	"testing"
	"time"

	"github.com/nats-io/nats.go"

	"github.com/headroom-dev/headroom/state"
	"github.com/headroom-dev/headroom/stream"
)

// TestSeriesChurnOnTheBus pushes waves of short-lived series through a real
// embedded nats-server into a store with a series limit and idle expiry
// (invented data: each wave is a thousand new series, each sending for a
// quarter of an hour): expiry makes room for every wave, the limit holds,
// and the heap does not grow with the series that came and went.
func TestSeriesChurnOnTheBus(t *testing.T) {
	waves := 40
	if testing.Short() {
		waves = 12
	}
	const perWave, limit = 1000, 2500
	var s rejectsOnly
	pl := startPipeline(t, state.Config{Partitions: 4, MaxSeries: limit, IdleExpiry: 30 * time.Minute},
		stream.Config{Limits: stream.Limits{MaxFuture: -1, MaxPast: -1}},
		func(*nats.Conn) stream.Emitter { return &s })
	emb, store, proc := pl.emb, pl.store, pl.proc

	p, err := nats.Connect(emb.URL())
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(p.Close)
	start := time.Date(2026, 11, 1, 0, 0, 0, 0, time.UTC)
	var heapAfterWarmUp uint64
	sent := uint64(0)
	for w := range waves {
		// Fifteen points a minute apart for each series of the wave; the
		// waves are an hour apart in data time.
		for m := range 15 {
			var b strings.Builder
			b.WriteByte('[')
			ts := start.Add(time.Duration(w)*time.Hour + time.Duration(m)*time.Minute).UnixMilli()
			for i := range perWave {
				if i > 0 {
					b.WriteByte(',')
				}
				fmt.Fprintf(&b, `{"metric":"job_queue","labels":{"job":"w%d-%d"},"ts":%d,"value":%d}`, w, i, ts, i%7)
			}
			b.WriteByte(']')
			if err := p.Publish(stream.Subjects{}.PointsBase()+".churn", []byte(b.String())); err != nil {
				t.Fatal(err)
			}
			sent += perWave
		}
		if err := p.Flush(); err != nil {
			t.Fatal(err)
		}
		deadline := time.Now().Add(20 * time.Second)
		for st := proc.Stats(); st.Points+st.Rejected < sent; st = proc.Stats() {
			if time.Now().After(deadline) {
				t.Fatalf("wave %d: %d of %d points handled", w, st.Points+st.Rejected, sent)
			}
			time.Sleep(5 * time.Millisecond)
		}
		// What serve's sweeper does every few seconds; a pass takes a few
		// dozen calls.
		for range 200 {
			store.Expire(math.MaxInt64)
		}
		if n := store.Len(); n > limit {
			t.Fatalf("wave %d: %d series, limit %d", w, n, limit)
		}
		if w == 3 {
			heapAfterWarmUp = heapInUse()
		}
	}
	st := proc.Stats()
	if st.Rejected != 0 || len(s.rejects) != 0 {
		t.Errorf("%d points refused (first: %+v): expiry should have made room for every wave", st.Rejected, first(s.rejects))
	}
	if st.Points != sent {
		t.Errorf("%d of %d points applied", st.Points, sent)
	}
	heap := heapInUse()
	t.Logf("%d series came and went, %d live; heap in use %d kB after warm-up, %d kB at the end", waves*perWave, store.Len(), heapAfterWarmUp>>10, heap>>10)
	// Generous: a store that kept every series would need about 4 KiB
	// each, 160 MB for 40,000; reuse keeps it where the warm-up left it.
	if heap > heapAfterWarmUp+16<<20 {
		t.Errorf("heap grew from %d kB to %d kB", heapAfterWarmUp>>10, heap>>10)
	}
}

// rejectsOnly keeps reject records and drops the rest, so that the test's
// own memory does not grow with what it receives.
type rejectsOnly struct{ sink }

func (*rejectsOnly) Forecast(*stream.ForecastRecord) {}
func (*rejectsOnly) Breach(*stream.BreachRecord)     {}

func heapInUse() uint64 {
	runtime.GC()
	var m runtime.MemStats
	runtime.ReadMemStats(&m)
	return m.HeapInuse
}

func first(r []stream.RejectRecord) any {
	if len(r) == 0 {
		return nil
	}
	return r[0]
}
