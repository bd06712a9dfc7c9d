package stream_test

import (
	"context"
	"sync/atomic"
	"testing"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/rs/zerolog"

	"github.com/headroom-dev/headroom/stream"
)

// TestPublisherBuffer takes the server away from a plain publisher: records
// wait in the connection's bounded buffer, those beyond it are counted as
// failed, not lost silently, and once a server is back the buffered ones
// arrive.
func TestPublisherBuffer(t *testing.T) {
	ctx := context.Background()
	emb, port := startOnFreePort(t, "")
	// A small buffer stands for the 64 MiB one Dial sets.
	nc, err := nats.Connect(emb.URL(), nats.MaxReconnects(-1), nats.ReconnectWait(50*time.Millisecond), nats.ReconnectBufSize(16<<10))
	if err != nil {
		t.Fatal(err)
	}
	defer nc.Close()
	pub := stream.NewPublisher(nc, stream.Subjects{}, stream.JSON, zerolog.Nop())
	rec := stream.ForecastRecord{Kind: "forecast", Series: "s", Token: "tok", Engine: "incline"}

	emb.Shutdown()
	if !waitFor(t, 10*time.Second, func() bool { return nc.Status() == nats.RECONNECTING }) {
		t.Fatalf("status %v after the server went", nc.Status())
	}
	const sent = 1000 // about 150 KB of records: far beyond the buffer
	for range sent {
		pub.Forecast(&rec)
	}
	failed := pub.Failed()
	if failed == 0 || failed == sent {
		t.Fatalf("%d of %d records failed; want some buffered and the rest counted", failed, sent)
	}

	emb, err = stream.StartEmbedded(ctx, stream.EmbeddedConfig{Port: port, Log: zerolog.Nop()})
	if err != nil {
		t.Fatal(err)
	}
	defer emb.Shutdown()
	watch, err := nats.Connect(emb.URL())
	if err != nil {
		t.Fatal(err)
	}
	defer watch.Close()
	var got atomic.Int64
	if _, err := watch.Subscribe(stream.Subjects{}.AllForecasts(), func(*nats.Msg) { got.Add(1) }); err != nil {
		t.Fatal(err)
	}
	if err := watch.Flush(); err != nil {
		t.Fatal(err)
	}
	// The buffer is flushed on reconnection, possibly before the watcher
	// subscribed; a record published after that shows the path is back.
	if !waitFor(t, 10*time.Second, func() bool { return nc.Status() == nats.CONNECTED }) {
		t.Fatal("publisher did not reconnect")
	}
	pub.Forecast(&rec)
	if err := pub.Settle(ctx); err != nil {
		t.Fatal(err)
	}
	if !waitFor(t, 5*time.Second, func() bool { return got.Load() >= 1 }) {
		t.Error("no record after the reconnection")
	}
	if pub.Failed() != failed {
		t.Errorf("failed grew from %d to %d after the reconnection", failed, pub.Failed())
	}
	t.Logf("%d records buffered, %d counted as failed", sent-failed, failed)
}
