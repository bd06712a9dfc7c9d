package main

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"os/exec"
	"os/signal"
	"path/filepath"
	"reflect"
	"strings"
	"syscall"
	"testing"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"
	"github.com/rs/zerolog"

	"github.com/headroom-dev/headroom/state"
	"github.com/headroom-dev/headroom/stream"
)

// runMainEnv makes the test binary act as the headroom command, so that a
// test can run `headroom serve` as a process of its own and kill it.
const runMainEnv = "HEADROOM_TEST_RUN_MAIN"

func TestMain(m *testing.M) {
	if os.Getenv(runMainEnv) == "1" {
		ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
		code := run(ctx, os.Args[1:], os.Stdout, os.Stderr)
		stop()
		os.Exit(code)
	}
	os.Exit(m.Run())
}

// killInput is an invented scenario fleet (scenario data): volumes filling
// at different rates and daily cycles, a point a minute for two days, ten
// minutes of every series per message.
func killInput(start time.Time) [][]byte {
	rng := rand.New(rand.NewPCG(3, 3))
	var msgs [][]byte
	var b strings.Builder
	for m := 0; m < 2*24*60; m++ {
		h := float64(m) / 60
		for s := 0; s < 10; s++ {
			v := 0.3 + 0.6*h/float64(20+8*s)
			if s >= 6 {
				v = 0.5 + 0.3*math.Sin(2*math.Pi*h/24+float64(s))
			}
			v += 0.003 * rng.NormFloat64()
			if b.Len() == 0 {
				b.WriteByte('[')
			} else {
				b.WriteByte(',')
			}
			fmt.Fprintf(&b, `{"metric":"volume_used_ratio","labels":{"host":"h%d"},"ts":%d,"value":%g}`,
				s, start.Add(time.Duration(m)*time.Minute).UnixMilli(), v)
		}
		if (m+1)%10 == 0 {
			b.WriteByte(']')
			msgs = append(msgs, []byte(b.String()))
			b.Reset()
		}
	}
	return msgs
}

// TestServeKilled runs `headroom serve --durable` as a process, kills it
// with SIGKILL while it ingests, starts it again and finishes feeding it:
// its final state, and the breach events in the events stream, must be
// those of an uninterrupted run on the same input.
func TestServeKilled(t *testing.T) {
	if testing.Short() {
		t.Skip("runs the command as a process")
	}
	start := time.Now().UTC().Add(-72 * time.Hour).Truncate(time.Hour)
	msgs := killInput(start)
	snapDir := t.TempDir()
	args := []string{"serve", "--durable", "--snapshot-dir", snapDir, "--snapshot-every", "1s",
		"--threshold", "0.9", "--match", "volume_used_ratio", "--horizon", "12h", "--warmup", "0",
		"--every", "5m", "--partitions", "4", "--log-level", "debug"}

	// The uninterrupted run: the same flags, the same messages in order.
	sc, err := parseServe(args[1:], &bytes.Buffer{})
	if err != nil {
		t.Fatal(err)
	}
	refStore, err := state.New(sc.eng.storeConfig())
	if err != nil {
		t.Fatal(err)
	}
	var ref breaches
	proc, err := stream.NewProcessor(refStore, &ref, sc.eng.config(sc.rules, sc.horizon, sc.engine))
	if err != nil {
		t.Fatal(err)
	}
	w := proc.NewWorker()
	for _, m := range msgs {
		w.Handle("headroom.points.fleet", m)
	}

	emb, err := stream.StartEmbedded(context.Background(), stream.EmbeddedConfig{Port: -1, DataDir: t.TempDir(), Log: zerolog.Nop()})
	if err != nil {
		t.Fatal(err)
	}
	defer emb.Shutdown()
	args = append(args, "--nats", emb.URL())
	js := connectJS(t, emb.URL())
	acked := func() uint64 { return ackFloor(js) }
	send := func(msgs [][]byte) {
		for _, m := range msgs {
			if _, err := js.Publish(context.Background(), "headroom.points.fleet", m); err != nil {
				t.Fatal(err)
			}
		}
	}
	snapFile := filepath.Join(snapDir, "headroom.snapshot")

	// First life: a third of the input, a snapshot, then more, and SIGKILL
	// as soon as it is applied, before the next snapshot is due.
	first, log1 := startServe(t, args)
	third, cut := len(msgs)/3, len(msgs)*6/10
	send(msgs[:third])
	if !waitUntil(30*time.Second, func() bool { return acked() == uint64(third) }) {
		t.Fatalf("first life acknowledged %d of %d: %s", acked(), third, log1)
	}
	if !waitUntil(10*time.Second, func() bool { _, err := os.Stat(snapFile); return err == nil }) {
		t.Fatalf("no snapshot: %s", log1)
	}
	send(msgs[third:cut])
	if !waitUntil(30*time.Second, func() bool { return acked() == uint64(cut) }) {
		t.Fatalf("first life acknowledged %d of %d: %s", acked(), cut, log1)
	}
	if err := first.Process.Kill(); err != nil {
		t.Fatal(err)
	}
	_ = first.Wait()

	// Second life: restored, it replays what the snapshot missed, gets the
	// rest, and stops on SIGTERM with a final snapshot.
	second, log2 := startServe(t, args)
	send(msgs[cut:])
	if !waitUntil(30*time.Second, func() bool { return acked() == uint64(len(msgs)) }) {
		t.Fatalf("second life acknowledged %d of %d: %s", acked(), len(msgs), log2)
	}
	if err := second.Process.Signal(syscall.SIGTERM); err != nil {
		t.Fatal(err)
	}
	if err := second.Wait(); err != nil {
		t.Fatalf("second life: %v: %s", err, log2)
	}
	if !strings.Contains(log2.String(), `"state restored"`) {
		t.Errorf("second life did not restore a snapshot: %s", log2)
	}
	t.Logf("first life: %s", grepLog(log1.String(), `"snapshot"`))
	t.Logf("second life: %s", grepLog(log2.String(), `"state restored"`))

	f, err := os.Open(snapFile)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	got, cp, err := stream.ReadSnapshot(f, sc.eng.storeConfig())
	if err != nil {
		t.Fatal(err)
	}
	if cp.Seq != uint64(len(msgs)) {
		t.Errorf("final snapshot at sequence %d, want %d", cp.Seq, len(msgs))
	}
	if diff := diffStores(refStore, got); diff != "" {
		t.Error(diff)
	}

	// Each breach event of the uninterrupted run is in the events stream,
	// once, the same, and the newest forecast record of each series there
	// is the uninterrupted run's newest.
	cons, err := js.OrderedConsumer(context.Background(), stream.DefaultEventsStream, jetstream.OrderedConsumerConfig{
		FilterSubjects: []string{stream.Subjects{}.AllBreaches(), stream.Subjects{}.AllForecasts()},
	})
	if err != nil {
		t.Fatal(err)
	}
	stored := map[string]int{}
	newest := map[string]stream.ForecastRecord{}
	it, err := cons.Messages()
	if err != nil {
		t.Fatal(err)
	}
	defer it.Stop()
	for {
		m, err := it.Next(jetstream.NextMaxWait(time.Second))
		if err != nil {
			break
		}
		if strings.HasPrefix(m.Subject(), "headroom.forecast.") {
			var f stream.ForecastRecord
			if err := json.Unmarshal(m.Data(), &f); err != nil {
				t.Fatal(err)
			}
			newest[f.Series] = f
			continue
		}
		var e stream.BreachRecord
		if err := json.Unmarshal(m.Data(), &e); err != nil {
			t.Fatal(err)
		}
		if want, ok := ref.byID[e.ID]; !ok || !reflect.DeepEqual(e, want) {
			t.Errorf("stored event not in the uninterrupted run: %+v", e)
		}
		stored[e.ID]++
	}
	for id, n := range stored {
		if n != 1 {
			t.Errorf("event %s stored %d times", id, n)
		}
	}
	if len(stored) != len(ref.byID) || len(stored) < 3 {
		t.Errorf("%d breach events stored, uninterrupted run %d", len(stored), len(ref.byID))
	}
	if len(newest) != len(ref.newest) {
		t.Errorf("forecasts of %d series stored, uninterrupted run %d", len(newest), len(ref.newest))
	}
	for k, want := range ref.newest {
		if got := newest[k]; !reflect.DeepEqual(got, want) {
			t.Errorf("%s: newest stored forecast differs:\n got %+v\nwant %+v", k, got, want)
		}
	}
}

// connectJS connects to url, closing the connection when the test ends.
func connectJS(t *testing.T, url string, opts ...nats.Option) jetstream.JetStream {
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
	return js
}

// ackFloor returns the last stream sequence the sidecar's durable
// consumer has acknowledged, which it does once the points are applied,
// or 0 before there is one.
func ackFloor(js jetstream.JetStream) uint64 {
	c, err := js.Consumer(context.Background(), stream.DefaultPointsStream, stream.DefaultConsumer)
	if err != nil {
		return 0
	}
	info, err := c.Info(context.Background())
	if err != nil {
		return 0
	}
	return info.AckFloor.Stream
}

// startServe starts the test binary as `headroom serve args` and waits
// until it ingests.
func startServe(t *testing.T, args []string) (*exec.Cmd, *syncBuffer) {
	t.Helper()
	var log syncBuffer
	cmd := exec.Command(os.Args[0], args...)
	cmd.Env = append(os.Environ(), runMainEnv+"=1")
	cmd.Stdout, cmd.Stderr = &log, &log
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { _ = cmd.Process.Kill() })
	if !waitUntil(30*time.Second, func() bool { return strings.Contains(log.String(), `"ingesting durably"`) }) {
		t.Fatalf("serve did not start: %s", log.String())
	}
	return cmd, &log
}

func waitUntil(d time.Duration, cond func() bool) bool {
	for deadline := time.Now().Add(d); time.Now().Before(deadline); time.Sleep(20 * time.Millisecond) {
		if cond() {
			return true
		}
	}
	return cond()
}

func grepLog(log, what string) string {
	var out []string
	for _, l := range strings.Split(log, "\n") {
		if strings.Contains(l, what) {
			out = append(out, l)
		}
	}
	return strings.Join(out, "\n")
}

// breaches keeps the breach events of a run by id, and its newest
// forecast record of each series.
type breaches struct {
	byID   map[string]stream.BreachRecord
	newest map[string]stream.ForecastRecord
}

func (b *breaches) Forecast(r *stream.ForecastRecord) {
	if b.newest == nil {
		b.newest = map[string]stream.ForecastRecord{}
	}
	c := *r
	c.Points = append([]stream.ForecastPoint(nil), r.Points...)
	b.newest[r.Series] = c
}

func (b *breaches) Reject(*stream.RejectRecord) {}
func (b *breaches) Breach(r *stream.BreachRecord) {
	if b.byID == nil {
		b.byID = map[string]stream.BreachRecord{}
	}
	b.byID[r.ID] = *r
}

// diffStores describes how got's series differ from want's, by key: their
// views, memos, incidents and counts.
func diffStores(want, got *state.Store) string {
	type series struct {
		View      state.View
		Memo      state.Memo
		Incidents []state.Incident
		Points    uint64
	}
	all := func(s *state.Store) map[string]series {
		out := map[string]series{}
		for part := range s.Partitions() {
			s.Range(part, func(se *state.Series) bool {
				var x series
				se.View(&x.View, 0)
				x.Memo, x.Incidents, x.Points = *se.Memo(), append([]state.Incident{}, se.Incidents()...), se.Points()
				out[se.Key()] = x
				return true
			})
		}
		return out
	}
	w, g := all(want), all(got)
	var diffs []string
	if len(w) != len(g) {
		diffs = append(diffs, fmt.Sprintf("%d series, uninterrupted run %d", len(g), len(w)))
	}
	for k, x := range w {
		// Printed, so that the NaN of an empty bucket equals itself; %v
		// prints the shortest text that gives the float back.
		if fmt.Sprintf("%+v", g[k]) != fmt.Sprintf("%+v", x) {
			diffs = append(diffs, fmt.Sprintf("%s differs: got memo %+v incidents %+v, want memo %+v incidents %+v", k, g[k].Memo, g[k].Incidents, x.Memo, x.Incidents))
		}
	}
	return strings.Join(diffs, "\n")
}
