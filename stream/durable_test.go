package stream_test

import (
	"context"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
	"reflect"
	"slices"
	"sort"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"
	"github.com/rs/zerolog"

	"github.com/headroom-dev/headroom/forecast"
	"github.com/headroom-dev/headroom/state"
	"github.com/headroom-dev/headroom/stream"
)

// durableInput is an invented scenario fleet (scenario data): volumes that
// fill at different rates, one cleaned up, and daily cycles, one point a
// minute for two days, in messages of ten minutes of every series.
func durableInput() [][]byte {
	start := time.Date(2026, 11, 20, 0, 0, 0, 0, time.UTC)
	rng := rand.New(rand.NewPCG(7, 7))
	const series, minutes = 12, 2 * 24 * 60
	var msgs [][]byte
	var batch []wirePoint
	for m := 0; m < minutes; m++ {
		h := float64(m) / 60
		for s := 0; s < series; s++ {
			var v float64
			switch {
			case s < 6: // fills crossing 0.9 at 20 h, 30 h, ... 70 h
				v = 0.3 + 0.6*h/float64(20+10*s)
			case s == 6: // fills, then is cleaned up after a day
				v = 0.5 + 0.02*h
				if h > 24 {
					v = 0.2
				}
			default: // daily cycles
				v = 0.5 + 0.3*math.Sin(2*math.Pi*h/24+float64(s))
			}
			v += 0.003 * rng.NormFloat64()
			batch = append(batch, wirePoint{"volume_used_ratio", map[string]string{"host": fmt.Sprintf("h%02d", s)},
				start.Add(time.Duration(m) * time.Minute).UnixMilli(), v})
		}
		if (m+1)%10 == 0 {
			b, err := json.Marshal(batch)
			if err != nil {
				panic(err)
			}
			msgs = append(msgs, b)
			batch = batch[:0]
		}
	}
	return msgs
}

func durableConfig(t *testing.T) stream.Config {
	t.Helper()
	m, err := forecast.ParseMatch("volume_used_ratio")
	if err != nil {
		t.Fatal(err)
	}
	return stream.Config{
		Rules: []forecast.Rule{
			{Name: "volume-full", Match: m, Threshold: 0.9, Direction: forecast.Above, Horizon: 12 * time.Hour, Warmup: -1},
			{Name: "volume-low", Match: m, Threshold: 0.25, Direction: forecast.Below, Horizon: 6 * time.Hour, Warmup: -1},
		},
		Every:  5 * time.Minute,
		Now:    func() time.Time { return time.Date(2026, 11, 23, 0, 0, 0, 0, time.UTC) },
		Limits: stream.Limits{MaxFuture: 48 * time.Hour},
	}
}

var durableStore = state.Config{Partitions: 4, MaxSeries: 1000}

// records keeps copies of what a processor emits.
type records struct {
	mu        sync.Mutex
	forecasts map[string]stream.ForecastRecord // newest per series
	breaches  []stream.BreachRecord
}

func (r *records) Forecast(f *stream.ForecastRecord) {
	c := *f
	c.Points = append([]stream.ForecastPoint(nil), f.Points...)
	r.mu.Lock()
	if r.forecasts == nil {
		r.forecasts = map[string]stream.ForecastRecord{}
	}
	r.forecasts[f.Series] = c
	r.mu.Unlock()
}

func (r *records) Breach(b *stream.BreachRecord) {
	r.mu.Lock()
	r.breaches = append(r.breaches, *b)
	r.mu.Unlock()
}

func (r *records) Reject(*stream.RejectRecord) {}

// tee sends records to several emitters.
type tee []stream.Emitter

func (t tee) Forecast(r *stream.ForecastRecord) {
	for _, e := range t {
		e.Forecast(r)
	}
}
func (t tee) Breach(r *stream.BreachRecord) {
	for _, e := range t {
		e.Breach(r)
	}
}
func (t tee) Reject(r *stream.RejectRecord) {
	for _, e := range t {
		e.Reject(r)
	}
}

// frozen is a Snapshots that stops keeping snapshots once frozen, as a
// process that has crashed would: later saves leave the last one.
type frozen struct {
	stream.Snapshots
	stop  atomic.Bool
	saved atomic.Int64
}

func (f *frozen) Save(ctx context.Context, write func(io.Writer) error) error {
	if f.stop.Load() {
		return nil
	}
	f.saved.Add(1)
	return f.Snapshots.Save(ctx, write)
}

// reference applies msgs in order to a fresh processor: the uninterrupted run.
func reference(t *testing.T, msgs [][]byte) (*state.Store, *records) {
	t.Helper()
	store, err := state.New(durableStore)
	if err != nil {
		t.Fatal(err)
	}
	var rec records
	p, err := stream.NewProcessor(store, &rec, durableConfig(t))
	if err != nil {
		t.Fatal(err)
	}
	w := p.NewWorker()
	for _, m := range msgs {
		w.Handle("headroom.points.fleet", m)
	}
	return store, &rec
}

// durableRun is one life of a durable sidecar.
type durableRun struct {
	d      *stream.Durable
	nc     *nats.Conn
	rec    *records
	cancel context.CancelFunc
	done   chan error
}

func startDurable(t *testing.T, url string, snaps stream.Snapshots) *durableRun {
	t.Helper()
	return startDurableWith(t, url, snaps, durableStore, nil)
}

// startDurableWith is startDurable with a store configured by scfg and
// tune, if not nil, applied to the Durable before it runs.
func startDurableWith(t *testing.T, url string, snaps stream.Snapshots, scfg state.Config, tune func(*stream.Durable)) *durableRun {
	t.Helper()
	ctx := context.Background()
	nc, err := stream.Dial{URL: url, Log: zerolog.Nop()}.Connect(ctx)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(nc.Close)
	store, cp := stream.LoadState(ctx, snaps, scfg, zerolog.Nop())
	if store == nil {
		if store, err = state.New(scfg); err != nil {
			t.Fatal(err)
		}
	}
	pub := stream.NewPublisher(nc, stream.Subjects{}, stream.JSON, zerolog.Nop())
	if err := pub.UseJetStream(256); err != nil {
		t.Fatal(err)
	}
	rec := &records{}
	p, err := stream.NewProcessor(store, tee{pub, rec}, durableConfig(t))
	if err != nil {
		t.Fatal(err)
	}
	p.Adopt(cp.Rules)
	ready := make(chan struct{})
	d := &stream.Durable{
		Conn: nc, Processor: p, Snapshots: snaps, From: cp, Every: 20 * time.Millisecond,
		Publisher: pub, Events: &stream.EventsStream{}, Ready: func() { close(ready) }, Log: zerolog.Nop(),
	}
	if tune != nil {
		tune(d)
	}
	rctx, cancel := context.WithCancel(ctx)
	run := &durableRun{d: d, nc: nc, rec: rec, cancel: cancel, done: make(chan error, 1)}
	go func() { run.done <- d.Run(rctx) }()
	select {
	case <-ready:
	case err := <-run.done:
		t.Fatalf("durable ingest: %v", err)
	}
	return run
}

func publishJS(t *testing.T, js jetstream.JetStream, msgs [][]byte) uint64 {
	t.Helper()
	var seq uint64
	for _, m := range msgs {
		ack, err := js.Publish(context.Background(), "headroom.points.fleet", m)
		if err != nil {
			t.Fatal(err)
		}
		seq = ack.Sequence
	}
	return seq
}

// TestDurableCrash stops a durable sidecar abruptly, after snapshots
// stopped being kept, restarts it from its last snapshot and finishes
// feeding it: its forecasts, incidents and events must be those of an
// uninterrupted run on the same input.
func TestDurableCrash(t *testing.T) {
	msgs := durableInput()
	refStore, ref := reference(t, msgs)

	emb, err := stream.StartEmbedded(context.Background(), stream.EmbeddedConfig{Port: -1, DataDir: t.TempDir(), Log: zerolog.Nop()})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(emb.Shutdown)
	snaps := &frozen{Snapshots: stream.DirSnapshots{Dir: t.TempDir()}}

	// First life: the stream is created, 60 % of the input sent; saving
	// snapshots stops at 30 %, and the sidecar dies at 60 %.
	a := startDurable(t, emb.URL(), snaps)
	js, err := jetstream.New(a.nc)
	if err != nil {
		t.Fatal(err)
	}
	cut, freeze := len(msgs)*6/10, uint64(len(msgs)*3/10)
	publishJS(t, js, msgs[:cut])
	if !waitFor(t, 30*time.Second, func() bool { return a.d.Applied() >= freeze && snaps.saved.Load() > 0 }) {
		t.Fatalf("first life applied %d messages, saved %d snapshots", a.d.Applied(), snaps.saved.Load())
	}
	snaps.stop.Store(true)
	if !waitFor(t, 30*time.Second, func() bool { return a.d.Applied() == uint64(cut) }) {
		t.Fatalf("first life applied %d of %d messages", a.d.Applied(), cut)
	}
	a.nc.Close() // nothing more gets out: no acknowledgement, no record
	a.cancel()
	<-a.done
	snaps.stop.Store(false)

	// Second life: restored, it replays from the snapshot and gets the rest.
	b := startDurable(t, emb.URL(), snaps)
	restored := b.d.From.Seq
	if restored == 0 || restored >= uint64(cut) {
		t.Fatalf("snapshot at sequence %d; want one between 0 and the crash at %d", restored, cut)
	}
	t.Logf("snapshot at sequence %d, crash at %d, %d messages replayed", restored, cut, uint64(cut)-restored)
	js2, err := jetstream.New(b.nc)
	if err != nil {
		t.Fatal(err)
	}
	last := publishJS(t, js2, msgs[cut:])
	if !waitFor(t, 30*time.Second, func() bool { return b.d.Applied() == last }) {
		t.Fatalf("second life applied %d of %d messages", b.d.Applied(), last)
	}
	b.cancel()
	if err := <-b.done; err != nil {
		t.Fatal(err)
	}
	if last != uint64(len(msgs)) {
		t.Fatalf("stream holds %d messages, sent %d", last, len(msgs))
	}

	compareStores(t, refStore, b.d.Processor.Store())

	// The newest forecast of every series is the uninterrupted run's.
	if len(b.rec.forecasts) != len(ref.forecasts) {
		t.Errorf("%d series forecast after the restart, %d in the uninterrupted run", len(b.rec.forecasts), len(ref.forecasts))
	}
	for k, want := range ref.forecasts {
		if got := b.rec.forecasts[k]; !reflect.DeepEqual(got, want) {
			t.Errorf("%s: newest forecast differs:\n got %+v\nwant %+v", k, got, want)
		}
	}

	// Every event of the uninterrupted run was emitted, the same, by one
	// life or the other, and none else; replayed ones carry their ids.
	want := map[string]stream.BreachRecord{}
	for _, e := range ref.breaches {
		want[e.ID] = e
	}
	got := map[string]stream.BreachRecord{}
	for _, e := range append(a.rec.breaches, b.rec.breaches...) {
		if w, ok := want[e.ID]; !ok || !reflect.DeepEqual(e, w) {
			t.Errorf("event not in the uninterrupted run: %+v", e)
		}
		got[e.ID] = e
	}
	if len(got) != len(want) {
		t.Errorf("%d distinct events, uninterrupted run %d", len(got), len(want))
	}
	open := 0
	for _, e := range ref.breaches {
		if e.State == "opened" {
			open++
		}
	}
	if open < 3 {
		t.Errorf("the scenario opened %d incidents; it is meant to open several", open)
	}

	// The events stream holds each breach event once: the replayed copies
	// were within its duplicate window.
	cons, err := js2.OrderedConsumer(context.Background(), stream.DefaultEventsStream, jetstream.OrderedConsumerConfig{
		FilterSubjects: []string{stream.Subjects{}.AllBreaches()},
	})
	if err != nil {
		t.Fatal(err)
	}
	seen := map[string]int{}
	for {
		m, err := cons.Next(jetstream.FetchMaxWait(time.Second))
		if err != nil {
			break
		}
		var e stream.BreachRecord
		if err := json.Unmarshal(m.Data(), &e); err != nil {
			t.Fatal(err)
		}
		seen[e.ID]++
	}
	for id, n := range seen {
		if n != 1 {
			t.Errorf("event %s stored %d times", id, n)
		}
		if _, ok := want[id]; !ok {
			t.Errorf("event %s stored but not in the uninterrupted run", id)
		}
	}
	if len(seen) != len(want) {
		t.Errorf("events stream holds %d breach events, want %d", len(seen), len(want))
	}
}

// seriesState is what a series holds that forecasts and alerts depend on.
type seriesState struct {
	View      state.View
	Memo      state.Memo
	Incidents []state.Incident
	Points    uint64
	Newest    int64
}

func storeStates(s *state.Store) map[string]seriesState {
	out := map[string]seriesState{}
	for part := range s.Partitions() {
		s.Range(part, func(se *state.Series) bool {
			var st seriesState
			se.View(&st.View, 0)
			st.Memo = *se.Memo()
			st.Incidents = append([]state.Incident{}, se.Incidents()...)
			st.Points, st.Newest = se.Points(), se.Newest()
			out[se.Key()] = st
			return true
		})
	}
	return out
}

func compareStores(t *testing.T, want, got *state.Store) {
	t.Helper()
	w, g := storeStates(want), storeStates(got)
	keys := make([]string, 0, len(w))
	for k := range w {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	if len(g) != len(w) {
		t.Errorf("%d series, uninterrupted run %d", len(g), len(w))
	}
	for _, k := range keys {
		// Printed, so that the NaN of an empty bucket equals itself; %v
		// prints the shortest text that gives the float back.
		if fmt.Sprintf("%+v", g[k]) != fmt.Sprintf("%+v", w[k]) {
			t.Errorf("%s: state differs from the uninterrupted run's:\n got memo %+v incidents %+v\nwant memo %+v incidents %+v",
				k, g[k].Memo, g[k].Incidents, w[k].Memo, w[k].Incidents)
		}
	}
}

// TestDurableServerRestart restarts the NATS server, with its JetStream
// store, under a durable sidecar in the middle of the input: the sidecar
// reconnects, its consumer goes on, and it ends in the state of an
// uninterrupted run.
func TestDurableServerRestart(t *testing.T) {
	msgs := durableInput()
	refStore, ref := reference(t, msgs)
	dataDir := t.TempDir()
	emb, port := startOnFreePort(t, dataDir)
	run := startDurable(t, emb.URL(), stream.DirSnapshots{Dir: t.TempDir()})
	half := len(msgs) / 2
	_, js := connectJS(t, emb.URL())
	publishJS(t, js, msgs[:half])
	if !waitFor(t, 30*time.Second, func() bool { return run.d.Applied() == uint64(half) }) {
		t.Fatalf("applied %d of %d before the restart", run.d.Applied(), half)
	}
	emb.Shutdown()
	emb, err := stream.StartEmbedded(context.Background(), stream.EmbeddedConfig{Port: port, DataDir: dataDir, Log: zerolog.Nop()})
	if err != nil {
		t.Fatal(err)
	}
	defer emb.Shutdown()
	// The same connection, reconnected.
	publishJS(t, js, msgs[half:])
	if !waitFor(t, 30*time.Second, func() bool { return run.d.Applied() == uint64(len(msgs)) }) {
		t.Fatalf("applied %d of %d after the restart", run.d.Applied(), len(msgs))
	}
	run.cancel()
	if err := <-run.done; err != nil {
		t.Fatal(err)
	}
	compareStores(t, refStore, run.d.Processor.Store())
	for k, want := range ref.forecasts {
		if got := run.rec.forecasts[k]; !reflect.DeepEqual(got, want) {
			t.Errorf("%s: newest forecast differs", k)
		}
	}
}

// TestDurableStreamChanged restarts a durable sidecar after its points
// stream lost messages it had not applied (a purge: they are skipped, and
// the state is that of the messages it did get) or was deleted and made
// anew (its sequences start over, and every message of the new stream is
// applied on top of the snapshot).
func TestDurableStreamChanged(t *testing.T) {
	msgs := durableInput()
	for _, tt := range []struct {
		name    string
		change  func(t *testing.T, js jetstream.JetStream)
		applied [][]byte // what the restarted sidecar ends having applied
		lastSeq uint64
	}{
		{"purged", func(t *testing.T, js jetstream.JetStream) {
			publishJS(t, js, msgs[100:120])
			s, err := js.Stream(context.Background(), stream.DefaultPointsStream)
			if err != nil {
				t.Fatal(err)
			}
			if err := s.Purge(context.Background()); err != nil {
				t.Fatal(err)
			}
		}, append(append([][]byte{}, msgs[:100]...), msgs[120:150]...), 150},
		{"made anew", func(t *testing.T, js jetstream.JetStream) {
			if err := js.DeleteStream(context.Background(), stream.DefaultPointsStream); err != nil {
				t.Fatal(err)
			}
		}, append(append([][]byte{}, msgs[:100]...), msgs[120:150]...), 30},
	} {
		t.Run(tt.name, func(t *testing.T) {
			emb, _, js := jsServer(t)
			snaps := stream.DirSnapshots{Dir: t.TempDir()}
			a := startDurable(t, emb.URL(), snaps)
			publishJS(t, js, msgs[:100])
			if !waitFor(t, 30*time.Second, func() bool { return a.d.Applied() == 100 }) {
				t.Fatalf("applied %d of 100", a.d.Applied())
			}
			a.cancel()
			if err := <-a.done; err != nil {
				t.Fatal(err)
			}
			tt.change(t, js)
			b := startDurable(t, emb.URL(), snaps)
			if b.d.From.Seq != 100 {
				t.Fatalf("restored at sequence %d, want 100", b.d.From.Seq)
			}
			publishJS(t, js, msgs[120:150])
			if !waitFor(t, 30*time.Second, func() bool { return b.d.Applied() == tt.lastSeq }) {
				t.Fatalf("applied up to %d, want %d", b.d.Applied(), tt.lastSeq)
			}
			b.cancel()
			if err := <-b.done; err != nil {
				t.Fatal(err)
			}
			refStore, _ := reference(t, tt.applied)
			compareStores(t, refStore, b.d.Processor.Store())
		})
	}
}

// TestDurableCrashExpiry is TestDurableCrash with idle expiry: one series
// falls silent for ten hours, longer than the six-hour expiry, and comes
// back. Sweeps go by the times the server stored the messages, so the
// restarted sidecar forgets it after the same messages as a sidecar that
// read the same stream without stopping, and the two end alike.
func TestDurableCrashExpiry(t *testing.T) {
	var msgs [][]byte
	for i, m := range durableInput() {
		// Messages are ten minutes apart: h03 is silent from hour 10 to 20.
		if h := i / 6; h >= 10 && h < 20 {
			var pts []wirePoint
			if err := json.Unmarshal(m, &pts); err != nil {
				t.Fatal(err)
			}
			pts = slices.DeleteFunc(pts, func(p wirePoint) bool { return p.Labels["host"] == "h03" })
			b, err := json.Marshal(pts)
			if err != nil {
				t.Fatal(err)
			}
			m = b
		}
		msgs = append(msgs, m)
	}
	scfg := durableStore
	scfg.IdleExpiry = 6 * time.Hour
	sweepOften := func(d *stream.Durable) { d.Sweep = time.Millisecond }

	emb, _, js := jsServer(t)
	snaps := &frozen{Snapshots: stream.DirSnapshots{Dir: t.TempDir()}}
	a := startDurableWith(t, emb.URL(), snaps, scfg, sweepOften)
	cut, freeze := len(msgs)*6/10, uint64(len(msgs)*3/10)
	publishJS(t, js, msgs[:cut])
	if !waitFor(t, 30*time.Second, func() bool { return a.d.Applied() >= freeze && snaps.saved.Load() > 0 }) {
		t.Fatalf("first life applied %d", a.d.Applied())
	}
	snaps.stop.Store(true)
	if !waitFor(t, 30*time.Second, func() bool { return a.d.Applied() == uint64(cut) }) {
		t.Fatalf("first life applied %d of %d", a.d.Applied(), cut)
	}
	a.nc.Close()
	a.cancel()
	<-a.done
	snaps.stop.Store(false)

	b := startDurableWith(t, emb.URL(), snaps, scfg, sweepOften)
	publishJS(t, js, msgs[cut:])
	if !waitFor(t, 30*time.Second, func() bool { return b.d.Applied() == uint64(len(msgs)) }) {
		t.Fatalf("second life applied %d of %d", b.d.Applied(), len(msgs))
	}
	b.cancel()
	if err := <-b.done; err != nil {
		t.Fatal(err)
	}
	if a.d.Expired()+b.d.Expired() == 0 {
		t.Fatal("no series expired: the scenario does not test expiry")
	}

	// The uninterrupted run reads the same stream, with the same storage
	// times, through a consumer of its own.
	ref := startDurableWith(t, emb.URL(), stream.DirSnapshots{Dir: t.TempDir()}, scfg, func(d *stream.Durable) {
		sweepOften(d)
		d.Consumer = "reference"
	})
	if !waitFor(t, 30*time.Second, func() bool { return ref.d.Applied() == uint64(len(msgs)) }) {
		t.Fatalf("reference applied %d of %d", ref.d.Applied(), len(msgs))
	}
	ref.cancel()
	if err := <-ref.done; err != nil {
		t.Fatal(err)
	}
	t.Logf("snapshot at %d, crash at %d; expired %d+%d, reference %d", b.d.From.Seq, cut, a.d.Expired(), b.d.Expired(), ref.d.Expired())
	compareStores(t, ref.d.Processor.Store(), b.d.Processor.Store())
}
