package stream_test

import (
	"context"
	"testing"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"
	"github.com/rs/zerolog"

	"github.com/headroom-dev/headroom/state"
	"github.com/headroom-dev/headroom/stream"
)

// BenchmarkDurableIngest measures points per second applied by durable
// ingest from a JetStream stream (file storage) holding 128-point msgpack
// batches over 10,000 series: fetch, apply, acknowledge, with no snapshot
// due during the run. The batches are stored before the clock starts, so
// this is the rate at which a restarted sidecar catches up. As in
// BenchmarkIngest, "ingest" evaluates each series once per data hour and
// "eval5m" every 5 minutes of data time; "eval5m-publish" also publishes
// its forecast records through JetStream into the events stream, as
// serve --durable does.
func BenchmarkDurableIngest(b *testing.B) {
	for _, c := range []struct {
		name    string
		every   time.Duration
		publish bool
	}{{"ingest", time.Hour, false}, {"eval5m", 5 * time.Minute, false}, {"eval5m-publish", 5 * time.Minute, true}} {
		b.Run(c.name, func(b *testing.B) { benchDurable(b, c.every, c.publish) })
	}
}

func benchDurable(b *testing.B, every time.Duration, publish bool) {
	const nSeries = 10_000
	emb, err := stream.StartEmbedded(context.Background(), stream.EmbeddedConfig{Port: -1, DataDir: b.TempDir(), Log: zerolog.Nop()})
	if err != nil {
		b.Fatal(err)
	}
	defer emb.Shutdown()
	nc, err := nats.Connect(emb.URL())
	if err != nil {
		b.Fatal(err)
	}
	defer nc.Close()
	js, err := jetstream.New(nc)
	if err != nil {
		b.Fatal(err)
	}
	ctx := context.Background()
	if _, err := js.CreateStream(ctx, jetstream.StreamConfig{Name: stream.DefaultPointsStream, Subjects: []string{"headroom.points.>"}}); err != nil {
		b.Fatal(err)
	}
	batches := benchBatches(nSeries, b.N)
	for _, m := range batches {
		if _, err := js.PublishAsync("headroom.points.bench", m); err != nil {
			b.Fatal(err)
		}
	}
	<-js.PublishAsyncComplete()

	store, err := state.New(state.Config{MaxSeries: 2 * nSeries})
	if err != nil {
		b.Fatal(err)
	}
	var (
		emit   stream.Emitter = &records{}
		pub    *stream.Publisher
		events *stream.EventsStream
	)
	if publish {
		pub = stream.NewPublisher(nc, stream.Subjects{}, stream.Msgpack, zerolog.Nop())
		if err := pub.UseJetStream(4096); err != nil {
			b.Fatal(err)
		}
		emit, events = pub, &stream.EventsStream{}
	}
	p, err := stream.NewProcessor(store, emit, stream.Config{Every: every, Limits: stream.Limits{MaxFuture: -1, MaxPast: -1}})
	if err != nil {
		b.Fatal(err)
	}
	rctx, cancel := context.WithCancel(ctx)
	defer cancel()
	d := &stream.Durable{Conn: nc, Processor: p, Snapshots: stream.DirSnapshots{Dir: b.TempDir()}, Every: time.Hour, Log: zerolog.Nop()}
	if publish {
		d.Publisher, d.Events = pub, events
	}
	done := make(chan error, 1)
	b.ResetTimer()
	t0 := time.Now()
	go func() { done <- d.Run(rctx) }()
	for d.Applied() < uint64(b.N) {
		time.Sleep(100 * time.Microsecond)
	}
	if pub != nil {
		if err := pub.Settle(ctx); err != nil {
			b.Fatal(err)
		}
	}
	el := time.Since(t0)
	b.StopTimer()
	b.ReportMetric(float64(b.N)*128/el.Seconds(), "points/s")
	if pub != nil {
		b.ReportMetric(float64(p.Stats().Forecasts)/el.Seconds(), "records/s")
	}
	cancel()
	if err := <-done; err != nil {
		b.Fatal(err)
	}
}
