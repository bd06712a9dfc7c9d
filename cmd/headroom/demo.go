package main

import (
	"context"
	"encoding/json"
	"flag"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
	"os"
	"sort"
	"strings"
	"sync"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/vmihailenco/msgpack/v5"

	"github.com/headroom-dev/headroom/forecast"
	"github.com/headroom-dev/headroom/stream"
)

// The demo fleet is invented: a few volumes of a made-up payments shop, a
// queue with a daily cycle and a connection pool, sampled every 30 s of
// data time and played through NATS in accelerated time.

type demoSeries struct {
	metric string
	labels map[string]string
	value  func(h float64, rng *rand.Rand) float64 // h: data hours since the start
	story  string
}

func demoFleet() []demoSeries {
	return []demoSeries{
		{
			metric: "volume_used_ratio", labels: map[string]string{"host": "ledger-1", "mount": "/var/lib/ledger"},
			story: "flat for days, filling at 3 %/h since 10 h ago; will cross 90 %",
			value: func(h float64, rng *rand.Rand) float64 {
				return 0.40 + 0.03*max(h+10, 0) + 0.004*rng.NormFloat64()
			},
		},
		{
			metric: "volume_used_ratio", labels: map[string]string{"host": "relay-2", "mount": "/spool"},
			story: "filling at 5 %/h since 4 h ago, cleaned up at 4 h, then refills slowly",
			value: func(h float64, rng *rand.Rand) float64 {
				if h < 4 {
					return 0.30 + 0.05*max(h+4, 0) + 0.004*rng.NormFloat64()
				}
				return 0.31 + 0.01*(h-4) + 0.004*rng.NormFloat64()
			},
		},
		{
			metric: "volume_used_ratio", labels: map[string]string{"host": "atlas-3", "mount": "/data"},
			story: "flat, with a one-off spike to 97 % at 3 h",
			value: func(h float64, rng *rand.Rand) float64 {
				if h >= 3 && h < 3+2.0/60 {
					return 0.97
				}
				return 0.62 + 0.006*rng.NormFloat64()
			},
		},
		{
			metric: "queue_depth", labels: map[string]string{"queue": "invoices", "region": "north"},
			story: "daily cycle between about 500 and 3,500 messages",
			value: func(h float64, rng *rand.Rand) float64 {
				return 2000 + 1500*math.Sin(2*math.Pi*(h-6)/24) + 80*rng.NormFloat64()
			},
		},
		{
			metric: "connection_pool_in_use", labels: map[string]string{"service": "checkout"},
			story: "grows slowly toward its limit of 100, but not within the horizon",
			value: func(h float64, rng *rand.Rand) float64 { return 60 + 0.2*h + 1.5*rng.NormFloat64() },
		},
	}
}

// demoHistory is the data sent at once before the demo plays: more than
// the rules' warm-up, so that the fleet arrives with a past.
const demoHistory = 100 * time.Hour

func demoRules() ([]forecast.Rule, error) {
	specs := []struct {
		name, match string
		threshold   float64
		horizon     time.Duration
	}{
		{"volume-full", "volume_used_ratio", 0.9, 6 * time.Hour},
		{"queue-backlog", "queue_depth", 6000, 2 * time.Hour},
		{"pool-exhausted", "connection_pool_in_use", 100, 6 * time.Hour},
	}
	var rules []forecast.Rule
	for _, s := range specs {
		m, err := forecast.ParseMatch(s.match)
		if err != nil {
			return nil, err
		}
		rules = append(rules, forecast.Rule{Name: s.name, Match: m, Threshold: s.threshold, Direction: forecast.Above, Horizon: s.horizon})
	}
	return rules, nil
}

func runDemo(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := flag.NewFlagSet("demo", flag.ContinueOnError)
	fs.SetOutput(stderr)
	var (
		dur     time.Duration
		speed   float64
		verbose bool
		set     = map[string]bool{}
	)
	fs.DurationVar(&dur, "for", 0, "stop after this long (wall time) and exit 0; 0 runs until interrupted")
	fs.Float64Var(&speed, "speed", 1440, "data seconds played per wall second (1440: a day in a minute)")
	fs.BoolVar(&verbose, "verbose", false, "print every forecast record instead of one per series per data hour")
	fs.Usage = func() {
		fmt.Fprintln(fs.Output(), "Usage: headroom demo [--for DURATION] [--speed N]\n\n"+
			"Start an embedded NATS server and the sidecar, feed an invented fleet through NATS in\n"+
			"accelerated time and print forecasts and breach events as they arrive.\n\nFlags:")
		fs.PrintDefaults()
	}
	if err := parse(fs, args, set); err != nil {
		return err
	}
	if speed <= 0 {
		return fmt.Errorf("--speed must be positive")
	}
	if dur > 0 {
		var cancel context.CancelFunc
		ctx, cancel = context.WithTimeout(ctx, dur)
		defer cancel()
	}
	dir, err := os.MkdirTemp("", "headroom-demo-")
	if err != nil {
		return err
	}
	defer os.RemoveAll(dir)

	rules, err := demoRules()
	if err != nil {
		return err
	}
	sc := sidecar{listen: "127.0.0.1:0", dataDir: dir, rules: rules, horizon: 6 * time.Hour}
	sc.eng = engineFlags{partitions: 16, maxSeries: 10_000, lateness: time.Minute, every: 5 * time.Minute,
		steps: 6, prefix: stream.DefaultPrefix, format: "json", maxFuture: 366 * 24 * time.Hour, subscribers: 1, logLevel: "warn"}
	if sc.log, err = sc.eng.logger(stderr); err != nil {
		return err
	}
	ready := make(chan string, 1)
	sc.ready = func(url string, _ *stream.Processor) { ready <- url }
	sctx, stopSidecar := context.WithCancel(context.Background())
	defer stopSidecar()
	done := make(chan error, 1)
	go func() { done <- sc.run(sctx) }()

	var url string
	select {
	case url = <-ready:
	case err := <-done:
		return fmt.Errorf("sidecar: %w", err)
	case <-ctx.Done():
		stopSidecar()
		<-done
		return nil
	}
	fmt.Fprintf(stdout, "headroom demo: embedded NATS at %s, playing %s of data per second of wall time\n", url, time.Duration(speed*float64(time.Second)))
	fmt.Fprintln(stdout, "rules: volume-full (volume_used_ratio above 0.9 within 6h), queue-backlog (queue_depth above 6000 within 2h), pool-exhausted (connection_pool_in_use above 100 within 6h)")
	fleet := demoFleet()
	for _, s := range fleet {
		fmt.Fprintf(stdout, "  %-58s %s\n", seriesText(s.metric, s.labels), s.story)
	}

	nc, err := nats.Connect(url, nats.Name("headroom-demo"))
	if err != nil {
		return fmt.Errorf("demo client: %w", err)
	}
	defer nc.Close()
	pr := &printer{w: stdout, verbose: verbose, lastHour: map[string]int64{}, from: demoStart(time.Now())}
	subjects := stream.Subjects{Prefix: stream.DefaultPrefix}
	for _, subj := range []string{subjects.AllForecasts(), subjects.AllBreaches(), subjects.Rejected()} {
		if _, err := nc.Subscribe(subj, pr.handle); err != nil {
			return err
		}
	}
	if err := nc.Flush(); err != nil {
		return err
	}

	feedErr := feed(ctx, nc, subjects.PointsBase()+".demo", fleet, speed)
	_ = nc.Flush()
	time.Sleep(200 * time.Millisecond) // let the last records arrive
	stopSidecar()
	if err := <-done; err != nil {
		return fmt.Errorf("sidecar: %w", err)
	}
	pr.summary()
	if feedErr != nil && ctx.Err() == nil {
		return feedErr
	}
	return nil
}

// demoStart is the data time at which the demo starts to play: a day
// before now, on the hour.
func demoStart(now time.Time) time.Time { return now.Add(-24 * time.Hour).Truncate(time.Hour) }

// feed publishes the fleet in accelerated time, one msgpack array per tick.
func feed(ctx context.Context, nc *nats.Conn, subject string, fleet []demoSeries, speed float64) error {
	const step = 30 * time.Second // data time between samples
	rng := rand.New(rand.NewPCG(7, 11))
	start := demoStart(time.Now())
	wall := time.Now()
	tick := time.NewTicker(20 * time.Millisecond)
	defer tick.Stop()
	type point struct {
		Metric string            `msgpack:"metric"`
		Labels map[string]string `msgpack:"labels"`
		TS     int64             `msgpack:"ts"`
		Value  float64           `msgpack:"value"`
	}
	// The history first, as fast as the bus takes it, in modest messages.
	batch := make([]point, 0, 2048)
	publish := func() error {
		if len(batch) == 0 {
			return nil
		}
		b, err := msgpack.Marshal(batch)
		if err != nil {
			return err
		}
		batch = batch[:0]
		if err := nc.Publish(subject, b); err != nil {
			return fmt.Errorf("publish points: %w", err)
		}
		return nil
	}
	for back := -demoHistory; back < 0; back += step {
		ts := start.Add(back).UnixMilli()
		for _, s := range fleet {
			batch = append(batch, point{s.metric, s.labels, ts, s.value(back.Hours(), rng)})
		}
		if len(batch) >= 2000 {
			if err := publish(); err != nil {
				return err
			}
		}
	}
	if err := publish(); err != nil {
		return err
	}
	wall = time.Now()
	var sent time.Duration // data time published so far
	for {
		select {
		case <-ctx.Done():
			return nil
		case now := <-tick.C:
			due := time.Duration(float64(now.Sub(wall)) * speed)
			batch = batch[:0]
			for ; sent+step <= due; sent += step {
				h := (sent + step).Hours()
				ts := start.Add(sent + step).UnixMilli()
				for _, s := range fleet {
					batch = append(batch, point{s.metric, s.labels, ts, s.value(h, rng)})
				}
			}
			if err := publish(); err != nil {
				return err
			}
		}
	}
}

// printer writes records for a person.
type printer struct {
	mu       sync.Mutex
	w        io.Writer
	verbose  bool
	lastHour map[string]int64
	counts   map[string]int
	from     time.Time // forecasts before this are counted, not printed
}

func (p *printer) handle(m *nats.Msg) {
	var head struct {
		Kind string `json:"kind"`
	}
	if json.Unmarshal(m.Data, &head) != nil {
		return
	}
	p.mu.Lock()
	defer p.mu.Unlock()
	if p.counts == nil {
		p.counts = map[string]int{}
	}
	switch head.Kind {
	case "forecast":
		var r stream.ForecastRecord
		if json.Unmarshal(m.Data, &r) != nil || len(r.Points) == 0 {
			return
		}
		p.counts["forecast"]++
		at, _ := time.Parse(time.RFC3339, r.At)
		hour := at.Unix() / 3600
		if at.Before(p.from) {
			return // the history sent before the demo plays
		}
		if !p.verbose && p.lastHour[r.Series] == hour {
			return
		}
		p.lastHour[r.Series] = hour
		last := r.Points[len(r.Points)-1]
		now := "now " + num(r.Level)
		if r.CycleSeconds > 0 {
			// A periodic forecast's level is the middle of its cycle.
			now = fmt.Sprintf("%s cycle around %s", strings.TrimSuffix(strings.TrimSuffix(time.Duration(r.CycleSeconds*float64(time.Second)).String(), "0s"), "0m"), num(r.Level))
		}
		fmt.Fprintf(p.w, "%s  forecast  %-58s %s  trend %s/h  in %s: %s (80%%: %s to %s)\n",
			at.Format("Jan 02 15:04"), r.Series, now, signed(r.TrendPerHour), r.Horizon, num(last.Mean), num(last.Lower80), num(last.Upper80))
	case "breach":
		var r stream.BreachRecord
		if json.Unmarshal(m.Data, &r) != nil {
			return
		}
		p.counts[r.State]++
		at, _ := time.Parse(time.RFC3339, r.At)
		line := fmt.Sprintf("%s  %-8s  %-58s rule %s: %s %s within %s, probability %.2f",
			at.Format("Jan 02 15:04"), strings.ToUpper(r.State), r.Series, r.Rule, r.Direction, num(r.Threshold), r.Horizon, r.Probability)
		if r.ETA != "" && r.State != "resolved" {
			line += ", crossing about " + clock(r.ETA)
			if r.ETAEarly != "" || r.ETALate != "" {
				line += " (" + orDash(clock(r.ETAEarly)) + " to " + orDash(clock(r.ETALate)) + ")"
			}
		}
		fmt.Fprintf(p.w, "%s  [incident %s]\n", line, r.Incident[:8])
	case "rejected":
		var r stream.RejectRecord
		if json.Unmarshal(m.Data, &r) != nil {
			return
		}
		p.counts["rejected"]++
		fmt.Fprintf(p.w, "rejected input: %s %s\n", r.Reason, r.Detail)
	}
}

func (p *printer) summary() {
	p.mu.Lock()
	defer p.mu.Unlock()
	keys := make([]string, 0, len(p.counts))
	for k := range p.counts {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	parts := make([]string, 0, len(keys))
	for _, k := range keys {
		parts = append(parts, fmt.Sprintf("%s %d", k, p.counts[k]))
	}
	fmt.Fprintf(p.w, "demo finished: %s\n", strings.Join(parts, ", "))
}

func seriesText(metric string, labels map[string]string) string {
	keys := make([]string, 0, len(labels))
	for k := range labels {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	parts := make([]string, len(keys))
	for i, k := range keys {
		parts[i] = fmt.Sprintf("%s=%q", k, labels[k])
	}
	return metric + "{" + strings.Join(parts, ",") + "}"
}

func num(x float64) string {
	switch a := math.Abs(x); {
	case a >= 100:
		return fmt.Sprintf("%.0f", x)
	case a >= 1:
		return fmt.Sprintf("%.2f", x)
	default:
		return fmt.Sprintf("%.3f", x)
	}
}

func signed(x float64) string {
	if x >= 0 {
		return "+" + num(x)
	}
	return num(x)
}

func clock(rfc string) string {
	t, err := time.Parse(time.RFC3339, rfc)
	if err != nil {
		return ""
	}
	return t.Format("Jan 02 15:04")
}

func orDash(s string) string {
	if s == "" {
		return "?"
	}
	return s
}
