package stream_test

import (
	"bytes"
	"context"
	"encoding/json"
	"net/url"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/rs/zerolog"

	"github.com/headroom-dev/headroom/state"
	"github.com/headroom-dev/headroom/stream"
)

// syncBuffer is a log sink safe for the connection's callback goroutines.
type syncBuffer struct {
	mu sync.Mutex
	b  bytes.Buffer
}

func (s *syncBuffer) Write(p []byte) (int, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.Write(p)
}

func (s *syncBuffer) String() string {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.String()
}

// startOnFreePort starts an embedded server (with JetStream in dataDir
// unless it is empty) on a free loopback port and returns it with the
// port, for tests that start another one on the same port.
func startOnFreePort(t testing.TB, dataDir string) (*stream.Embedded, int) {
	t.Helper()
	emb, err := stream.StartEmbedded(context.Background(), stream.EmbeddedConfig{Port: -1, DataDir: dataDir, Log: zerolog.Nop()})
	if err != nil {
		t.Fatal(err)
	}
	u, err := url.Parse(emb.URL())
	if err != nil {
		emb.Shutdown()
		t.Fatal(err)
	}
	port, err := strconv.Atoi(u.Port())
	if err != nil {
		emb.Shutdown()
		t.Fatal(err)
	}
	return emb, port
}

// TestServerRestart stops the NATS server under a running sidecar and
// starts a new one on the same port: the sidecar logs the loss and the
// reconnection, keeps its state, and goes on forecasting from the points
// that arrive after the restart (invented data: one series, one point a
// minute).
func TestServerRestart(t *testing.T) {
	ctx := context.Background()
	emb, port := startOnFreePort(t, "")

	var logs syncBuffer
	nc, err := stream.Dial{URL: emb.URL(), Log: zerolog.New(&logs)}.Connect(ctx)
	if err != nil {
		emb.Shutdown()
		t.Fatal(err)
	}
	store, err := state.New(state.Config{Partitions: 2})
	if err != nil {
		t.Fatal(err)
	}
	pub := stream.NewPublisher(nc, stream.Subjects{}, stream.JSON, zerolog.Nop())
	proc, err := stream.NewProcessor(store, pub, stream.Config{Limits: stream.Limits{MaxFuture: 400 * 24 * time.Hour}, EveryRecord: true})
	if err != nil {
		t.Fatal(err)
	}
	rctx, cancel := context.WithCancel(ctx)
	done := make(chan error, 1)
	ready := make(chan struct{})
	in := stream.Ingest{Conn: nc, Processor: proc, Log: zerolog.Nop(), Ready: func() { close(ready) }}
	go func() { done <- in.Run(rctx) }()
	<-ready
	current := emb
	t.Cleanup(func() {
		cancel()
		<-done
		nc.Close()
		current.Shutdown()
	})

	// A consumer that reconnects too, counting forecast records by time.
	var mu sync.Mutex
	var newest time.Time
	records := 0
	watch, err := nats.Connect(emb.URL(), nats.MaxReconnects(-1), nats.ReconnectWait(100*time.Millisecond))
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(watch.Close)
	if _, err := watch.Subscribe(stream.Subjects{}.AllForecasts(), func(m *nats.Msg) {
		var r stream.ForecastRecord
		if json.Unmarshal(m.Data, &r) != nil {
			return
		}
		at, _ := time.Parse(time.RFC3339, r.At)
		mu.Lock()
		records++
		if at.After(newest) {
			newest = at
		}
		mu.Unlock()
	}); err != nil {
		t.Fatal(err)
	}
	if err := watch.Flush(); err != nil {
		t.Fatal(err)
	}

	start := time.Date(2026, 11, 30, 0, 0, 0, 0, time.UTC)
	feed := func(from, to int) {
		t.Helper()
		p, err := nats.Connect(current.URL())
		if err != nil {
			t.Fatal(err)
		}
		defer p.Close()
		var b strings.Builder
		b.WriteByte('[')
		for m := from; m < to; m++ {
			if m > from {
				b.WriteByte(',')
			}
			b.WriteString(`{"metric":"volume_used_ratio","ts":` + strconv.FormatInt(start.Add(time.Duration(m)*time.Minute).UnixMilli(), 10) +
				`,"value":` + strconv.FormatFloat(0.5+0.0005*float64(m), 'f', 5, 64) + `}`)
		}
		b.WriteByte(']')
		if err := p.Publish(stream.Subjects{}.PointsBase()+".test", []byte(b.String())); err != nil {
			t.Fatal(err)
		}
		if err := p.Flush(); err != nil {
			t.Fatal(err)
		}
	}
	waitFor := func(what string, ok func() bool) {
		t.Helper()
		deadline := time.Now().Add(10 * time.Second)
		for !ok() {
			if time.Now().After(deadline) {
				t.Fatalf("timed out waiting for %s", what)
			}
			time.Sleep(20 * time.Millisecond)
		}
	}

	feed(0, 60)
	waitFor("forecasts before the restart", func() bool {
		mu.Lock()
		defer mu.Unlock()
		return newest.After(start.Add(40 * time.Minute))
	})

	current.Shutdown()
	waitFor("the sidecar to notice", func() bool { return !nc.IsConnected() })
	next, err := stream.StartEmbedded(ctx, stream.EmbeddedConfig{Port: port, Log: zerolog.Nop()})
	if err != nil {
		t.Fatal(err)
	}
	current = next
	waitFor("the sidecar to reconnect", nc.IsConnected)
	waitFor("the consumer to reconnect", watch.IsConnected)
	// Resubscriptions travel with the reconnection; a round trip makes
	// sure the server has them before the producer publishes.
	if err := nc.Flush(); err != nil {
		t.Fatal(err)
	}
	if err := watch.Flush(); err != nil {
		t.Fatal(err)
	}

	feed(60, 120)
	waitFor("forecasts from after the restart", func() bool {
		mu.Lock()
		defer mu.Unlock()
		return newest.After(start.Add(100 * time.Minute))
	})

	// The state kept the history from before the restart.
	k := state.MakeKey(nil, []byte("volume_used_ratio"), nil)
	var points uint64
	store.Do(k, func(s *state.Series) { points = s.Points() })
	if points != 120 {
		t.Errorf("series holds %d points, want the 120 sent before and after the restart", points)
	}
	log := logs.String()
	for _, want := range []string{"nats disconnected", "nats reconnected"} {
		if !strings.Contains(log, want) {
			t.Errorf("log lacks %q:\n%s", want, log)
		}
	}
	if pub.Failed() != 0 {
		t.Logf("%d records could not be published while the server was down (counted)", pub.Failed())
	}
}
