package stream_test

import (
	"context"
	"strconv"
	"sync/atomic"
	"testing"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/rs/zerolog"
	"github.com/vmihailenco/msgpack/v5"

	"github.com/headroom-dev/headroom/stream"
)

// benchBatches pre-encodes 128-point msgpack batches over nSeries series
// (three labels each), points 10 s apart in each series' own time, so that
// buckets close and evaluations run as they would in production.
func benchBatches(nSeries, nBatches int) [][]byte {
	start := time.Date(2026, 11, 1, 0, 0, 0, 0, time.UTC).UnixMilli()
	out := make([][]byte, nBatches)
	i := 0
	batch := make([]wirePoint, 128)
	for b := range out {
		for j := range batch {
			s := i % nSeries
			round := i / nSeries
			batch[j] = wirePoint{
				Metric: "volume_used_bytes",
				Labels: map[string]string{"host": "node-" + strconv.Itoa(s%5000), "mount": "/m" + strconv.Itoa(s/5000), "zone": "z" + strconv.Itoa(s%3)},
				TS:     start + int64(round)*10_000,
				Value:  float64(round) * 1e6,
			}
			i++
		}
		out[b], _ = msgpack.Marshal(batch)
	}
	return out
}

// BenchmarkIngest measures points per second from a producer connection
// through a real embedded nats-server into the sidecar, beside a subscriber
// that only counts messages, in the same run.
func BenchmarkIngest(b *testing.B) {
	const nSeries = 10_000

	run := func(b *testing.B, url string, applied func() uint64) {
		// Timestamps only move forward, so every run gets batches of its own.
		batches := benchBatches(nSeries, b.N)
		pub, err := nats.Connect(url)
		if err != nil {
			b.Fatal(err)
		}
		defer pub.Close()
		b.ResetTimer()
		t0 := time.Now()
		for i := 0; i < b.N; i++ {
			if err := pub.Publish("headroom.points.bench", batches[i]); err != nil {
				b.Fatal(err)
			}
		}
		want := uint64(b.N)
		for applied() < want {
			time.Sleep(100 * time.Microsecond)
		}
		el := time.Since(t0)
		b.StopTimer()
		b.ReportMetric(float64(b.N)*128/el.Seconds(), "points/s")
	}

	b.Run("count-only", func(b *testing.B) {
		emb, err := stream.StartEmbedded(context.Background(), stream.EmbeddedConfig{Port: -1, Log: zerolog.Nop()})
		if err != nil {
			b.Fatal(err)
		}
		defer emb.Shutdown()
		nc, err := nats.Connect(emb.URL())
		if err != nil {
			b.Fatal(err)
		}
		defer nc.Close()
		var n atomic.Uint64
		sub, err := nc.Subscribe("headroom.points.>", func(*nats.Msg) { n.Add(1) })
		if err != nil {
			b.Fatal(err)
		}
		_ = sub.SetPendingLimits(-1, -1)
		_ = nc.Flush()
		run(b, emb.URL(), n.Load)
	})

	// Evaluations are the expensive part of the pipeline (tens of µs each);
	// "sidecar" evaluates each series once per data hour, so it measures
	// ingest (transport, decode, state); "sidecar-eval5m" evaluates every
	// 5 minutes of data time, one evaluation per 30 points at this 10 s
	// spacing.
	for _, c := range []struct {
		name  string
		every time.Duration
	}{{"sidecar", time.Hour}, {"sidecar-eval5m", 5 * time.Minute}} {
		b.Run(c.name, func(b *testing.B) {
			sc := startSidecar(b, nil, stream.Config{Every: c.every})
			base := sc.proc.Stats().Messages
			run(b, sc.emb.URL(), func() uint64 { return sc.proc.Stats().Messages - base })
			st := sc.proc.Stats()
			if st.Rejected > 0 {
				b.Errorf("rejected %d points", st.Rejected)
			}
			b.ReportMetric(float64(st.Forecasts)/float64(st.Points)*1e3, "forecasts/kpoint")
		})
	}
}
