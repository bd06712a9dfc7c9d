package stream_test

import (
	"bytes"
	"context"
	"errors"
	"io"
	"os"
	"path/filepath"
	"strings"
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

// jsServer starts an embedded server with JetStream and connects to it.
func jsServer(t *testing.T) (*stream.Embedded, *nats.Conn, jetstream.JetStream) {
	t.Helper()
	emb, err := stream.StartEmbedded(context.Background(), stream.EmbeddedConfig{Port: -1, DataDir: t.TempDir(), Log: zerolog.Nop()})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(emb.Shutdown)
	nc, js := connectJS(t, emb.URL())
	return emb, nc, js
}

// connectJS connects to url, closing the connection when the test ends.
func connectJS(t testing.TB, url string, opts ...nats.Option) (*nats.Conn, jetstream.JetStream) {
	t.Helper()
	nc, err := nats.Connect(url, opts...)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(nc.Close)
	js, err := jetstream.New(nc)
	if err != nil {
		t.Fatal(err)
	}
	return nc, js
}

func TestSnapshots(t *testing.T) {
	_, _, js := jsServer(t)
	bucket, err := stream.OpenBucketSnapshots(context.Background(), js, "headroom-snapshots", "node-a")
	if err != nil {
		t.Fatal(err)
	}
	again, err := stream.OpenBucketSnapshots(context.Background(), js, "headroom-snapshots", "node-a")
	if err != nil {
		t.Fatalf("opening an existing bucket: %v", err)
	}
	dir := t.TempDir()
	for _, tt := range []struct {
		name       string
		snaps, two stream.Snapshots // two is a second handle on the same place
	}{
		{"dir", stream.DirSnapshots{Dir: dir, Name: "node-a"}, stream.DirSnapshots{Dir: dir, Name: "node-a"}},
		{"bucket", bucket, again},
	} {
		t.Run(tt.name, func(t *testing.T) {
			ctx := context.Background()
			for _, prev := range []bool{false, true} {
				if _, err := tt.snaps.Load(ctx, prev); !errors.Is(err, stream.ErrNoSnapshot) {
					t.Fatalf("load (previous %v) before any save: %v, want ErrNoSnapshot", prev, err)
				}
			}
			// Large enough to take many object chunks.
			big := bytes.Repeat([]byte("0123456789abcdef"), 1<<16)
			for i, want := range [][]byte{[]byte("first"), big, []byte("third")} {
				if err := tt.snaps.Save(ctx, func(w io.Writer) error { _, err := w.Write(want); return err }); err != nil {
					t.Fatalf("save %d: %v", i, err)
				}
				if got := load(t, tt.two, false); !bytes.Equal(got, want) {
					t.Fatalf("save %d: loaded %d bytes, want %d", i, len(got), len(want))
				}
				if i > 0 {
					before := [][]byte{[]byte("first"), big}[i-1]
					if got := load(t, tt.two, true); !bytes.Equal(got, before) {
						t.Fatalf("save %d: previous is %d bytes, want %d", i, len(got), len(before))
					}
				}
			}
			// A save whose writer fails leaves the previous snapshot.
			boom := errors.New("boom")
			err := tt.snaps.Save(ctx, func(w io.Writer) error {
				_, _ = w.Write([]byte("partial"))
				return boom
			})
			if !errors.Is(err, boom) {
				t.Fatalf("failed save returned %v", err)
			}
			if got := load(t, tt.two, false); string(got) != "third" {
				t.Fatalf("after a failed save: %q", got)
			}
			if got := load(t, tt.two, true); !bytes.Equal(got, big) {
				t.Fatalf("after a failed save the previous is %d bytes", len(got))
			}
			if !strings.Contains(tt.snaps.String(), "node-a") {
				t.Errorf("String() = %q does not name the snapshot", tt.snaps.String())
			}
		})
	}
	// No temporary file is left behind by the failed save, nor by a
	// process killed while writing: the next save removes it.
	stale := filepath.Join(dir, ".node-a.snapshot-123456")
	if err := os.WriteFile(stale, []byte("half a snapshot"), 0o600); err != nil {
		t.Fatal(err)
	}
	other := filepath.Join(dir, ".node-b.snapshot-1") // another sidecar's, being written
	if err := os.WriteFile(other, nil, 0o600); err != nil {
		t.Fatal(err)
	}
	d := stream.DirSnapshots{Dir: dir, Name: "node-a"}
	if err := d.Save(context.Background(), func(w io.Writer) error { _, err := w.Write([]byte("fourth")); return err }); err != nil {
		t.Fatal(err)
	}
	if err := os.Remove(other); err != nil {
		t.Errorf("another name's temporary file: %v", err)
	}
	entries, err := os.ReadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	if len(entries) != 2 || entries[0].Name() != "node-a.snapshot" || entries[1].Name() != "node-a.snapshot.prev" {
		t.Errorf("snapshot directory holds %v", entries)
	}
}

func load(t *testing.T, s stream.Snapshots, previous bool) []byte {
	t.Helper()
	r, err := s.Load(context.Background(), previous)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	b, err := io.ReadAll(r)
	if err != nil {
		t.Fatal(err)
	}
	return b
}

func TestCheckpointRoundTrip(t *testing.T) {
	store, err := state.New(durableStore)
	if err != nil {
		t.Fatal(err)
	}
	w, _ := newDurableWorker(t, store, durableConfig(t))
	for _, m := range durableInput()[:50] {
		w.Handle("headroom.points.fleet", m)
	}
	cp := stream.Checkpoint{Stream: "HEADROOM_POINTS", Created: time.Date(2026, 12, 1, 0, 0, 0, 0, time.UTC), Seq: 50, Rules: []string{"volume-full", "volume-low"}}
	var buf bytes.Buffer
	if err := stream.WriteSnapshot(&buf, store, cp); err != nil {
		t.Fatal(err)
	}
	got, gcp, err := stream.ReadSnapshot(bytes.NewReader(buf.Bytes()), durableStore)
	if err != nil {
		t.Fatal(err)
	}
	if !gcp.Created.Equal(cp.Created) || gcp.Seq != cp.Seq || gcp.Stream != cp.Stream || strings.Join(gcp.Rules, ",") != "volume-full,volume-low" {
		t.Errorf("checkpoint %+v, wrote %+v", gcp, cp)
	}
	compareStores(t, store, got)

	// Damage is an error, not a panic or a half-restored store.
	bad := append([]byte(nil), buf.Bytes()...)
	bad[len(bad)/2] ^= 1
	if _, _, err := stream.ReadSnapshot(bytes.NewReader(bad), durableStore); !errors.Is(err, state.ErrSnapshot) {
		t.Errorf("damaged snapshot: %v, want state.ErrSnapshot", err)
	}
	other := durableStore
	other.Layout = []state.Level{{Width: time.Minute, Count: 60}, {Width: time.Hour, Count: 48}}
	if _, _, err := stream.ReadSnapshot(bytes.NewReader(buf.Bytes()), other); !errors.Is(err, state.ErrSnapshotLayout) {
		t.Errorf("other layout: %v, want state.ErrSnapshotLayout", err)
	}
}

func newDurableWorker(t *testing.T, store *state.Store, cfg stream.Config) (*stream.Worker, *stream.Processor) {
	t.Helper()
	p, err := stream.NewProcessor(store, &records{}, cfg)
	if err != nil {
		t.Fatal(err)
	}
	return p.NewWorker(), p
}

// TestAdopt restores incidents under a changed rule set: they follow their
// rule's name to its new index, and those of a removed rule go.
func TestAdopt(t *testing.T) {
	store, err := state.New(durableStore)
	if err != nil {
		t.Fatal(err)
	}
	cfg := durableConfig(t)
	w, _ := newDurableWorker(t, store, cfg)
	for _, m := range durableInput() {
		w.Handle("headroom.points.fleet", m)
	}
	before := incidentsByRule(store, []string{"volume-full", "volume-low"})
	if before["volume-full"] == 0 || before["volume-low"] == 0 {
		t.Fatalf("the scenario should leave incidents of both rules: %v", before)
	}
	tests := []struct {
		name  string
		rules []string // names of the new rule set, in order
	}{
		{"same", []string{"volume-full", "volume-low"}},
		{"swapped", []string{"volume-low", "volume-full"}},
		{"one removed", []string{"volume-low"}},
		{"one added in front", []string{"inode-full", "volume-full", "volume-low"}},
		{"all removed", nil},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			var buf bytes.Buffer
			if err := stream.WriteSnapshot(&buf, store, stream.Checkpoint{Rules: []string{"volume-full", "volume-low"}}); err != nil {
				t.Fatal(err)
			}
			restored, cp, err := stream.ReadSnapshot(&buf, durableStore)
			if err != nil {
				t.Fatal(err)
			}
			c := cfg
			c.Rules = nil
			for _, name := range tt.rules {
				r := cfg.Rules[0]
				r.Name = name
				c.Rules = append(c.Rules, r)
			}
			_, p := newDurableWorker(t, restored, c)
			p.Adopt(cp.Rules)
			got := incidentsByRule(restored, tt.rules)
			for _, name := range tt.rules {
				if got[name] != before[name] {
					t.Errorf("rule %s: %d incidents, had %d", name, got[name], before[name])
				}
			}
			if got[""] != 0 {
				t.Errorf("%d incidents refer to no rule", got[""])
			}
		})
	}
}

// incidentsByRule counts the incidents of a store by the name of their
// rule in rules; "" counts those whose index is outside rules.
func incidentsByRule(s *state.Store, rules []string) map[string]int {
	n := map[string]int{}
	for part := range s.Partitions() {
		s.Range(part, func(se *state.Series) bool {
			for _, inc := range se.Incidents() {
				if int(inc.Rule) < len(rules) {
					n[rules[inc.Rule]]++
				} else {
					n[""]++
				}
			}
			return true
		})
	}
	return n
}

// TestPublisherJetStream publishes records through JetStream: with no
// stream to take them they fail and are kept, Settle retries them, and
// once a stream exists they are stored; breach events once each.
func TestPublisherJetStream(t *testing.T) {
	_, nc, js := jsServer(t)
	pub := stream.NewPublisher(nc, stream.Subjects{}, stream.JSON, zerolog.Nop())
	if err := pub.UseJetStream(16); err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithTimeout(context.Background(), 20*time.Second)
	defer cancel()
	ev := stream.BreachRecord{Kind: "breach", Series: "s", Token: "tok", State: string(forecast.Opened), ID: "e1"}
	pub.Breach(&ev)
	if err := pub.Settle(ctx); err == nil {
		t.Fatal("settle without a stream succeeded")
	}
	if pub.Failed() != 1 || pub.Retried() != 1 {
		t.Fatalf("failed %d, retried %d; want 1 and 1", pub.Failed(), pub.Retried())
	}
	if err := stream.EnsureEvents(ctx, js, stream.Subjects{}, stream.EventsStream{}); err != nil {
		t.Fatal(err)
	}
	for range 3 { // the same event thrice: a replay
		pub.Breach(&ev)
	}
	pub.Forecast(&stream.ForecastRecord{Kind: "forecast", Series: "s", Token: "tok"})
	if err := pub.Settle(ctx); err != nil {
		t.Fatal(err)
	}
	s, err := js.Stream(ctx, stream.DefaultEventsStream)
	if err != nil {
		t.Fatal(err)
	}
	info, err := s.Info(ctx)
	if err != nil {
		t.Fatal(err)
	}
	if info.State.Msgs != 2 {
		t.Errorf("events stream holds %d records, want the event once and the forecast", info.State.Msgs)
	}
	if pub.Failed() != 1 {
		t.Errorf("failed %d after the stream exists, want still 1", pub.Failed())
	}
}

// TestDurableDefaults creates both streams with their defaults and refuses
// a points stream that would forget acknowledged messages.
func TestDurableDefaults(t *testing.T) {
	emb, _, js := jsServer(t)
	ctx := context.Background()
	run := startDurable(t, emb.URL(), stream.DirSnapshots{Dir: t.TempDir()})
	run.cancel()
	if err := <-run.done; err != nil {
		t.Fatal(err)
	}
	for name, want := range map[string][]string{
		stream.DefaultPointsStream: {"headroom.points.>"},
		stream.DefaultEventsStream: {"headroom.forecast.*", "headroom.breach.*", "headroom.rejected"},
	} {
		s, err := js.Stream(ctx, name)
		if err != nil {
			t.Fatal(err)
		}
		info, err := s.Info(ctx)
		if err != nil {
			t.Fatal(err)
		}
		c := info.Config
		if strings.Join(c.Subjects, " ") != strings.Join(want, " ") || c.MaxAge != 24*time.Hour || c.Retention != jetstream.LimitsPolicy || c.Storage != jetstream.FileStorage {
			t.Errorf("%s: %+v", name, c)
		}
	}

	// A work-queue stream drops what is acknowledged: refused.
	_, nc2, js2 := jsServer(t)
	if _, err := js2.CreateStream(ctx, jetstream.StreamConfig{Name: stream.DefaultPointsStream, Subjects: []string{"headroom.points.>"}, Retention: jetstream.WorkQueuePolicy}); err != nil {
		t.Fatal(err)
	}
	p, err := stream.NewProcessor(mustStore(t), &records{}, stream.Config{})
	if err != nil {
		t.Fatal(err)
	}
	d := &stream.Durable{Conn: nc2, Processor: p, Snapshots: stream.DirSnapshots{Dir: t.TempDir()}, Log: zerolog.Nop()}
	if err := d.Run(ctx); err == nil || !strings.Contains(err.Error(), "limits retention") {
		t.Errorf("work-queue stream: %v", err)
	}
}

func mustStore(t *testing.T) *state.Store {
	t.Helper()
	s, err := state.New(durableStore)
	if err != nil {
		t.Fatal(err)
	}
	return s
}

// failing is a Snapshots whose first saves fail.
type failing struct {
	stream.Snapshots
	left atomic.Int64
}

func (f *failing) Save(ctx context.Context, write func(io.Writer) error) error {
	if f.left.Add(-1) >= 0 {
		return errors.New("disk full")
	}
	return f.Snapshots.Save(ctx, write)
}

// TestSnapshotFailure keeps ingesting while snapshots fail, counts the
// failures, and writes one once saving works again.
func TestSnapshotFailure(t *testing.T) {
	emb, _, js := jsServer(t)
	snaps := &failing{Snapshots: stream.DirSnapshots{Dir: t.TempDir()}}
	snaps.left.Store(3)
	run := startDurable(t, emb.URL(), snaps)
	msgs := durableInput()
	publishJS(t, js, msgs[:100])
	if !waitFor(t, 30*time.Second, func() bool { return run.d.Applied() == 100 }) {
		t.Fatalf("applied %d of 100 while snapshots fail", run.d.Applied())
	}
	publishJS(t, js, msgs[100:120])
	if !waitFor(t, 30*time.Second, func() bool { return run.d.Snapshotted() > 0 && run.d.Applied() == 120 }) {
		t.Fatalf("applied %d, %d snapshots, %d failed", run.d.Applied(), run.d.Snapshotted(), run.d.SnapshotsFailed())
	}
	if run.d.SnapshotsFailed() != 3 {
		t.Errorf("%d snapshots failed, want 3", run.d.SnapshotsFailed())
	}
	run.cancel()
	if err := <-run.done; err != nil {
		t.Fatal(err)
	}
}

// TestLoadState restores the newest usable snapshot: the newest, else the
// previous one, else none.
func TestLoadState(t *testing.T) {
	store := mustStore(t)
	w, _ := newDurableWorker(t, store, durableConfig(t))
	for _, m := range durableInput()[:20] {
		w.Handle("headroom.points.fleet", m)
	}
	dir := t.TempDir()
	snaps := stream.DirSnapshots{Dir: dir}
	ctx := context.Background()
	if s, cp := stream.LoadState(ctx, snaps, durableStore, zerolog.Nop()); s != nil || cp.Seq != 0 {
		t.Fatalf("no snapshot: restored %v at %d", s != nil, cp.Seq)
	}
	for _, seq := range []uint64{10, 20} {
		if err := snaps.Save(ctx, func(w io.Writer) error { return stream.WriteSnapshot(w, store, stream.Checkpoint{Seq: seq}) }); err != nil {
			t.Fatal(err)
		}
	}
	damage := func(path string) {
		t.Helper()
		b, err := os.ReadFile(path)
		if err != nil {
			t.Fatal(err)
		}
		b[len(b)/2] ^= 0x40
		if err := os.WriteFile(path, b, 0o600); err != nil {
			t.Fatal(err)
		}
	}
	tests := []struct {
		name    string
		before  func()
		cfg     state.Config
		wantSeq uint64 // 0: nothing restored
	}{
		{"newest", func() {}, durableStore, 20},
		{"other layout", func() {}, state.Config{Layout: []state.Level{{Width: time.Minute, Count: 60}, {Width: time.Hour, Count: 48}}}, 0},
		{"newest damaged", func() { damage(filepath.Join(dir, "headroom.snapshot")) }, durableStore, 10},
		{"newest gone, as after a crash between the renames", func() { _ = os.Remove(filepath.Join(dir, "headroom.snapshot")) }, durableStore, 10},
		{"both damaged", func() { damage(filepath.Join(dir, "headroom.snapshot.prev")) }, durableStore, 0},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			tt.before()
			s, cp := stream.LoadState(ctx, snaps, tt.cfg, zerolog.Nop())
			if (s != nil) != (tt.wantSeq != 0) || cp.Seq != tt.wantSeq {
				t.Fatalf("restored %v at sequence %d, want sequence %d", s != nil, cp.Seq, tt.wantSeq)
			}
			if s != nil {
				compareStores(t, store, s)
			}
		})
	}
}
