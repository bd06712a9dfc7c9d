package stream_test

import (
	"context"
	"encoding/json"
	"math"
	"math/rand/v2"
	"sync"
	"testing"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/rs/zerolog"
	"github.com/vmihailenco/msgpack/v5"

	"github.com/headroom-dev/headroom/forecast"
	"github.com/headroom-dev/headroom/state"
	"github.com/headroom-dev/headroom/stream"
)

// pipeline is a Processor fed by Ingest from a real embedded nats-server
// bound to a free loopback port.
type pipeline struct {
	emb   *stream.Embedded
	nc    *nats.Conn // the pipeline's connection
	store *state.Store
	proc  *stream.Processor
	stop  func()
}

// startPipeline starts a server, a store and a processor writing to what
// emit makes of the connection, and ingests until the test ends.
func startPipeline(t testing.TB, scfg state.Config, cfg stream.Config, emit func(*nats.Conn) stream.Emitter) *pipeline {
	t.Helper()
	ctx := context.Background()
	emb, err := stream.StartEmbedded(ctx, stream.EmbeddedConfig{Port: -1, DataDir: t.TempDir(), Log: zerolog.Nop()})
	if err != nil {
		t.Fatal(err)
	}
	nc, err := stream.Dial{URL: emb.URL(), Log: zerolog.Nop()}.Connect(ctx)
	if err != nil {
		emb.Shutdown()
		t.Fatal(err)
	}
	store, err := state.New(scfg)
	if err != nil {
		t.Fatal(err)
	}
	proc, err := stream.NewProcessor(store, emit(nc), cfg)
	if err != nil {
		t.Fatal(err)
	}
	ready := make(chan struct{})
	rctx, cancel := context.WithCancel(ctx)
	done := make(chan error, 1)
	in := stream.Ingest{Conn: nc, Processor: proc, Log: zerolog.Nop(), Ready: func() { close(ready) }}
	go func() { done <- in.Run(rctx) }()
	select {
	case <-ready:
	case err := <-done:
		t.Fatalf("ingest: %v", err)
	}
	pl := &pipeline{emb: emb, nc: nc, store: store, proc: proc}
	pl.stop = func() {
		cancel()
		<-done
		nc.Close()
		emb.Shutdown()
	}
	t.Cleanup(pl.stop)
	return pl
}

// sidecar is a pipeline that publishes its records as JSON on the bus.
type sidecar = pipeline

func startSidecar(t testing.TB, rules []forecast.Rule, cfg stream.Config) *sidecar {
	t.Helper()
	cfg.Rules = rules
	if cfg.Limits.MaxFuture == 0 {
		cfg.Limits.MaxFuture = 400 * 24 * time.Hour
	}
	return startPipeline(t, state.Config{Partitions: 8, MaxSeries: 200_000}, cfg, func(nc *nats.Conn) stream.Emitter {
		return stream.NewPublisher(nc, stream.Subjects{}, stream.JSON, zerolog.Nop())
	})
}

// collector gathers breach records from the bus.
type collector struct {
	mu     sync.Mutex
	events []stream.BreachRecord
	fc     int
}

func (c *collector) subscribe(t *testing.T, url string) {
	t.Helper()
	nc, err := nats.Connect(url)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(nc.Close)
	if _, err := nc.Subscribe(stream.Subjects{}.AllBreaches(), func(m *nats.Msg) {
		var r stream.BreachRecord
		if err := json.Unmarshal(m.Data, &r); err != nil {
			t.Errorf("breach record: %v", err)
			return
		}
		c.mu.Lock()
		c.events = append(c.events, r)
		c.mu.Unlock()
	}); err != nil {
		t.Fatal(err)
	}
	if _, err := nc.Subscribe(stream.Subjects{}.AllForecasts(), func(m *nats.Msg) {
		c.mu.Lock()
		c.fc++
		c.mu.Unlock()
	}); err != nil {
		t.Fatal(err)
	}
	if err := nc.Flush(); err != nil {
		t.Fatal(err)
	}
}

func (c *collector) find(series, state string) (stream.BreachRecord, bool) {
	c.mu.Lock()
	defer c.mu.Unlock()
	for _, e := range c.events {
		if e.Series == series && e.State == state {
			return e, true
		}
	}
	return stream.BreachRecord{}, false
}

type wirePoint struct {
	Metric string            `json:"metric" msgpack:"metric"`
	Labels map[string]string `json:"labels" msgpack:"labels"`
	TS     int64             `json:"ts" msgpack:"ts"`
	Value  float64           `json:"value" msgpack:"value"`
}

// publishSeries sends points in batches of 128 in the given encoding.
func publishSeries(t *testing.T, url, encoding string, pts []wirePoint) {
	t.Helper()
	nc, err := nats.Connect(url)
	if err != nil {
		t.Fatal(err)
	}
	defer nc.Close()
	for i := 0; i < len(pts); i += 128 {
		batch := pts[i:min(i+128, len(pts))]
		var b []byte
		if encoding == "msgpack" {
			b, err = msgpack.Marshal(batch)
		} else {
			b, err = json.Marshal(batch)
		}
		if err != nil {
			t.Fatal(err)
		}
		if err := nc.Publish("headroom.points.test", b); err != nil {
			t.Fatal(err)
		}
	}
	if err := nc.Flush(); err != nil {
		t.Fatal(err)
	}
}

// fill is an invented scenario series (scenario data): a volume that fills
// linearly with small noise, optionally cleaned up at cleanAt hours.
func fill(metric, host string, start time.Time, hours, from, perHour, cleanAt, cleanTo float64, seed uint64) []wirePoint {
	rng := rand.New(rand.NewPCG(seed, 1))
	var pts []wirePoint
	for s := 0.0; s < hours*3600; s += 30 {
		h := s / 3600
		v := from + perHour*h
		if cleanAt > 0 && h >= cleanAt {
			v = cleanTo
		}
		pts = append(pts, wirePoint{metric, map[string]string{"host": host, "mount": "/data"}, start.Add(time.Duration(s) * time.Second).UnixMilli(), v + 0.002*rng.NormFloat64()})
	}
	return pts
}

func waitFor(t *testing.T, d time.Duration, cond func() bool) bool {
	t.Helper()
	deadline := time.Now().Add(d)
	for time.Now().Before(deadline) {
		if cond() {
			return true
		}
		time.Sleep(20 * time.Millisecond)
	}
	return cond()
}

// TestEndToEnd publishes filling series through a real embedded nats-server
// and checks the breach lifecycle that comes back on the bus.
func TestEndToEnd(t *testing.T) {
	rule := forecast.Rule{Name: "volume-full", Threshold: 0.9, Direction: forecast.Above, Horizon: 6 * time.Hour, Warmup: -1}
	m, err := forecast.ParseMatch("volume_used_ratio")
	if err != nil {
		t.Fatal(err)
	}
	rule.Match = m
	sc := startSidecar(t, []forecast.Rule{rule}, stream.Config{})
	var col collector
	col.subscribe(t, sc.emb.URL())

	start := time.Date(2026, 11, 20, 0, 0, 0, 0, time.UTC)
	// 0.5 + 0.05/h crosses 0.9 at exactly 8 h.
	trueCross := start.Add(8 * time.Hour)
	for _, enc := range []string{"msgpack", "json"} {
		t.Run(enc, func(t *testing.T) {
			host := "fill-" + enc
			key := `volume_used_ratio{host="` + host + `",mount="/data"}`
			publishSeries(t, sc.emb.URL(), enc, fill("volume_used_ratio", host, start, 7, 0.5, 0.05, 0, 0, 1))
			if !waitFor(t, 10*time.Second, func() bool { _, ok := col.find(key, "opened"); return ok }) {
				t.Fatalf("no opened event for %s; stats %+v", key, sc.proc.Stats())
			}
			ev, _ := col.find(key, "opened")
			at, _ := time.Parse(time.RFC3339, ev.At)
			eta, err := time.Parse(time.RFC3339, ev.ETA)
			if err != nil {
				t.Fatalf("eta %q: %v", ev.ETA, err)
			}
			remaining := trueCross.Sub(at)
			if errAbs := eta.Sub(trueCross); math.Abs(float64(errAbs)) > 0.1*float64(remaining) {
				t.Errorf("eta %s is %s off the true crossing %s; more than 10%% of the %s remaining", eta, errAbs, trueCross, remaining)
			}
			if ev.Incident == "" || ev.ID == "" || ev.Probability < 0.8 {
				t.Errorf("opened event incomplete: %+v", ev)
			}
			t.Logf("opened at %s, eta %s (true %s), early %s, late %s, p=%.2f", ev.At, ev.ETA, trueCross.Format(time.RFC3339), ev.ETAEarly, ev.ETALate, ev.Probability)
		})
	}

	col.mu.Lock()
	if col.fc == 0 {
		t.Error("no forecast records on the forecast subjects")
	}
	col.mu.Unlock()

	t.Run("cleanup resolves", func(t *testing.T) {
		key := `volume_used_ratio{host="cleaned",mount="/data"}`
		// Fills at 0.06/h from 0.55, cleaned to 0.3 after 4 h, then flat.
		publishSeries(t, sc.emb.URL(), "msgpack", fill("volume_used_ratio", "cleaned", start, 8, 0.55, 0.06, 4, 0.3, 2))
		if !waitFor(t, 10*time.Second, func() bool { _, ok := col.find(key, "resolved"); return ok }) {
			t.Fatalf("no resolved event; events: %+v", col.events)
		}
		op, ok := col.find(key, "opened")
		if !ok {
			t.Fatal("resolved without opened")
		}
		res, _ := col.find(key, "resolved")
		if op.Incident != res.Incident {
			t.Errorf("incident id changed: opened %s, resolved %s", op.Incident, res.Incident)
		}
		if op.ID == res.ID {
			t.Error("event ids must differ per event")
		}
	})
}
