package main

import (
	"bufio"
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/rs/zerolog"

	"github.com/headroom-dev/headroom/stream"

	"github.com/headroom-dev/headroom/forecast/backtest"
)

func TestHelp(t *testing.T) {
	for _, args := range [][]string{{"--help"}, {"serve", "--help"}, {"demo", "--help"}, {"replay", "--help"}} {
		var out, errb bytes.Buffer
		if code := run(context.Background(), args, &out, &errb); code != 0 {
			t.Errorf("%v: exit %d, stderr %s", args, code, errb.String())
		}
		if !strings.Contains(errb.String(), "Usage") {
			t.Errorf("%v: no usage text: %q", args, errb.String())
		}
	}
	var out, errb bytes.Buffer
	if code := run(context.Background(), []string{"nonsense"}, &out, &errb); code != 2 {
		t.Errorf("unknown command: exit %d", code)
	}
	if code := run(context.Background(), []string{"replay", "--bogus"}, &out, &errb); code != 2 {
		t.Errorf("unknown flag: exit %d", code)
	}
}

func TestParseTime(t *testing.T) {
	want := time.Date(2014, 4, 1, 0, 5, 0, 0, time.UTC).UnixMilli()
	for _, s := range []string{"2014-04-01 00:05:00", "2014-04-01T00:05:00Z", "2014-04-01T02:05:00+02:00", "1396310700"} {
		got, err := backtest.ParseTime(s)
		if err != nil || got != want {
			t.Errorf("ParseTime(%q) = %d, %v; want %d", s, got, err, want)
		}
	}
	if _, err := backtest.ParseTime("yesterday"); err == nil {
		t.Error("ParseTime accepted nonsense")
	}
}

// writeFillCSV writes an invented scenario series: a volume filling at
// 2 %/h from 50 % with small noise, one point a minute.
func writeFillCSV(t *testing.T, hours int) string {
	t.Helper()
	rng := rand.New(rand.NewPCG(3, 4))
	var b strings.Builder
	b.WriteString("timestamp,value\n")
	start := time.Date(2026, 10, 1, 0, 0, 0, 0, time.UTC)
	for m := 0; m < hours*60; m++ {
		ts := start.Add(time.Duration(m) * time.Minute)
		fmt.Fprintf(&b, "%s,%.5f\n", ts.Format("2006-01-02 15:04:05"), 0.5+0.02*float64(m)/60+0.002*rng.NormFloat64())
	}
	p := filepath.Join(t.TempDir(), "volume.csv")
	if err := os.WriteFile(p, []byte(b.String()), 0o600); err != nil {
		t.Fatal(err)
	}
	return p
}

func TestReplay(t *testing.T) {
	in := writeFillCSV(t, 24) // crosses 0.9 at 20 h
	out := filepath.Join(t.TempDir(), "out.jsonl")
	var stdout, stderr bytes.Buffer
	// A day of history: less than the default warm-up.
	code := run(context.Background(), []string{"replay", "--in", in, "--out", out, "--horizon", "6h", "--every", "30m",
		"--threshold", "0.9", "--direction", "above", "--warmup", "0"}, &stdout, &stderr)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, stderr.String())
	}
	f, err := os.Open(out)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	var forecasts, opened int
	var lastAt time.Time
	sc := bufio.NewScanner(f)
	sc.Buffer(nil, 1<<20)
	for sc.Scan() {
		var head struct{ Kind, At, State string }
		if err := json.Unmarshal(sc.Bytes(), &head); err != nil {
			t.Fatalf("bad line %q: %v", sc.Text(), err)
		}
		at, err := time.Parse(time.RFC3339, head.At)
		if err != nil {
			t.Fatalf("at %q: %v", head.At, err)
		}
		switch head.Kind {
		case "forecast":
			if !lastAt.IsZero() && at.Sub(lastAt) != 30*time.Minute {
				t.Errorf("forecasts %s apart, want one per --every (30m)", at.Sub(lastAt))
			}
			lastAt = at
			forecasts++
		case "breach":
			if head.State == "opened" {
				opened++
			}
		}
	}
	if forecasts < 40 {
		t.Errorf("%d forecast records for 24 h at 30m, want about 47", forecasts)
	}
	if opened != 1 {
		t.Errorf("%d opened events, want 1", opened)
	}
}

// TestReplayNAB runs replay over a real series from the Numenta Anomaly
// Benchmark (../shared/datasets/nab, MIT licence) and checks that it writes
// well-formed records; accuracy is the quality suite's business.
func TestReplayNAB(t *testing.T) {
	in := filepath.Join("..", "..", "..", "shared", "datasets", "nab", "data", "realKnownCause", "nyc_taxi.csv")
	if _, err := os.Stat(in); err != nil {
		t.Skip("../shared/datasets/nab is absent; skipping")
	}
	var stdout, stderr bytes.Buffer
	code := run(context.Background(), []string{"replay", "--in", in, "--out", "-", "--horizon", "24h", "--every", "1h"}, &stdout, &stderr)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, stderr.String())
	}
	lines := strings.Count(stdout.String(), "\n")
	if lines < 24*7 {
		t.Errorf("%d records for a 7-month series at 1h, want many more", lines)
	}
}

// TestServe runs the serve command against a test-owned embedded server.
func TestServe(t *testing.T) {
	emb, err := stream.StartEmbedded(context.Background(), stream.EmbeddedConfig{Port: -1, Log: zerolog.Nop()})
	if err != nil {
		t.Fatal(err)
	}
	defer emb.Shutdown()
	ctx, cancel := context.WithCancel(context.Background())
	var stderr syncBuffer
	done := make(chan int, 1)
	go func() {
		done <- run(ctx, []string{"serve", "--nats", emb.URL(), "--threshold", "0.9", "--horizon", "6h", "--max-future", "9000h"}, &bytes.Buffer{}, &stderr)
	}()
	nc, err := nats.Connect(emb.URL())
	if err != nil {
		t.Fatal(err)
	}
	defer nc.Close()
	got := make(chan *nats.Msg, 1024)
	if _, err := nc.ChanSubscribe("headroom.forecast.*", got); err != nil {
		t.Fatal(err)
	}
	// Wait until the sidecar subscribes, then publish an hour of points.
	deadline := time.Now().Add(5 * time.Second)
	start := time.Date(2026, 11, 1, 0, 0, 0, 0, time.UTC)
	sent := false
	for !sent && time.Now().Before(deadline) {
		if strings.Contains(stderr.String(), "ingesting") {
			for m := 0; m < 90; m++ {
				p := fmt.Sprintf(`{"metric":"queue_depth","labels":{"queue":"a.b c*>"},"ts":%d,"value":%d}`, start.Add(time.Duration(m)*time.Minute).UnixMilli(), 100+m)
				if err := nc.Publish("headroom.points.x", []byte(p)); err != nil {
					t.Fatal(err)
				}
			}
			sent = true
		}
		time.Sleep(20 * time.Millisecond)
	}
	if !sent {
		t.Fatalf("serve never subscribed: %s", stderr.String())
	}
	select {
	case m := <-got:
		var r stream.ForecastRecord
		if err := json.Unmarshal(m.Data, &r); err != nil {
			t.Fatal(err)
		}
		if r.Series != `queue_depth{queue="a.b c*>"}` || !strings.HasSuffix(m.Subject, r.Token) {
			t.Errorf("record %+v on %s", r, m.Subject)
		}
	case <-time.After(10 * time.Second):
		t.Fatalf("no forecast record; log: %s", stderr.String())
	}
	cancel()
	if code := <-done; code != 0 {
		t.Errorf("serve exit %d: %s", code, stderr.String())
	}
	if !strings.Contains(stderr.String(), `"stopped"`) {
		t.Errorf("no clean stop logged: %s", stderr.String())
	}
}

// TestDemo runs the demo briefly and checks that a person sees forecasts,
// an opened and a resolved incident.
func TestDemo(t *testing.T) {
	if testing.Short() {
		t.Skip("demo takes 20 s")
	}
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	var stdout, stderr bytes.Buffer
	code := run(ctx, []string{"demo", "--for", "20s", "--speed", "2160"}, &stdout, &stderr)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, stderr.String())
	}
	out := stdout.String()
	for _, want := range []string{"forecast", "OPENED", "RESOLVED", "demo finished"} {
		if !strings.Contains(out, want) {
			t.Errorf("demo output lacks %q:\n%s", want, out)
		}
	}
}

// syncBuffer is a bytes.Buffer safe for one writer and one reader.
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

// TestReplayCleanup replays the invented scenario in testdata: the incident
// opens while the volume fills and resolves after the clean-up, with one
// incident id throughout.
func TestReplayCleanup(t *testing.T) {
	var stdout, stderr bytes.Buffer
	// The file holds less history than the default warm-up.
	code := run(context.Background(), []string{"replay", "--in", filepath.Join("..", "..", "testdata", "volume-fill-cleanup.csv"),
		"--out", "-", "--horizon", "6h", "--every", "5m", "--threshold", "0.9", "--warmup", "0"}, &stdout, &stderr)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, stderr.String())
	}
	var states []string
	incidents := map[string]bool{}
	for _, line := range strings.Split(strings.TrimSpace(stdout.String()), "\n") {
		var r stream.BreachRecord
		if err := json.Unmarshal([]byte(line), &r); err != nil {
			t.Fatal(err)
		}
		if r.Kind == "breach" {
			states = append(states, r.State)
			incidents[r.Incident] = true
		}
	}
	if len(states) < 2 || states[0] != "opened" || states[len(states)-1] != "resolved" || len(incidents) != 1 {
		t.Errorf("breach states %v over %d incidents, want opened … resolved on one incident", states, len(incidents))
	}
}

// TestDeployRules checks that the example rules file parses and that flag
// rules combine with it.
func TestDeployRules(t *testing.T) {
	rf := ruleFlags{file: filepath.Join("..", "..", "deploy", "rules.json"), threshold: 5, direction: "below", horizon: time.Hour,
		set: map[string]bool{"threshold": true}}
	rules, err := rf.rules()
	if err != nil {
		t.Fatal(err)
	}
	if len(rules) != 4 || rules[0].Name != "volume-full" || rules[3].Threshold != 5 || rules[3].Direction.String() != "below" {
		t.Errorf("rules %+v", rules)
	}
	bad := ruleFlags{match: "x", set: map[string]bool{"match": true}}
	if _, err := bad.rules(); err == nil {
		t.Error("--match without --threshold accepted")
	}
}
