package main

import (
	"context"
	"flag"
	"fmt"
	"io"
	"net"
	"os"
	"path/filepath"
	"strconv"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"
	"github.com/rs/zerolog"

	"github.com/headroom-dev/headroom/forecast"
	"github.com/headroom-dev/headroom/state"
	"github.com/headroom-dev/headroom/stream"
)

// sidecar is everything `serve` runs; `demo` runs the same.
type sidecar struct {
	dial     stream.Dial
	listen   string // embedded server address when dial.URL is empty
	dataDir  string
	eng      engineFlags
	dur      durableFlags
	rules    []forecast.Rule
	horizon  time.Duration
	engine   string
	log      zerolog.Logger
	ready    func(url string, p *stream.Processor) // called once ingesting
	embedded *stream.Embedded
}

func runServe(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	sc, err := parseServe(args, stderr)
	if err != nil {
		return err
	}
	return sc.run(ctx)
}

// parseServe reads serve's flags into a sidecar.
func parseServe(args []string, stderr io.Writer) (*sidecar, error) {
	fs := flag.NewFlagSet("serve", flag.ContinueOnError)
	fs.SetOutput(stderr)
	var (
		sc  sidecar
		rf  ruleFlags
		set = map[string]bool{}
	)
	fs.StringVar(&sc.dial.URL, "nats", "", "URL of an existing NATS server; empty starts an embedded one")
	fs.StringVar(&sc.dial.Creds, "creds", "", "NATS credentials file")
	fs.StringVar(&sc.dial.User, "user", "", "NATS user")
	fs.StringVar(&sc.dial.Password, "password", "", "NATS password; prefer HEADROOM_NATS_PASSWORD, as other users can read command lines")
	fs.StringVar(&sc.dial.Token, "token", "", "NATS token; prefer HEADROOM_NATS_TOKEN, as other users can read command lines")
	fs.StringVar(&sc.dial.NKeySeed, "nkey", "", "file holding the NKey seed for NATS")
	fs.StringVar(&sc.dial.TLSCA, "tls-ca", "", "CA bundle that signs the NATS server's certificate")
	fs.StringVar(&sc.dial.TLSCert, "tls-cert", "", "client certificate for NATS")
	fs.StringVar(&sc.dial.TLSKey, "tls-key", "", "client key for NATS")
	fs.StringVar(&sc.listen, "listen", "127.0.0.1:4222", "address of the embedded NATS server")
	fs.StringVar(&sc.dataDir, "data", "./headroom-data", "data directory of the embedded server (JetStream)")
	rf.register(fs)
	sc.eng.register(fs, true)
	sc.dur.register(fs)
	fs.Usage = func() {
		fmt.Fprintln(fs.Output(), "Usage: headroom serve [flags]\n\nRun the sidecar: ingest points, publish forecasts and breach events.\n\nFlags:")
		fs.PrintDefaults()
	}
	rf.set = set
	if err := parse(fs, args, set); err != nil {
		return nil, err
	}
	if sc.dial.Password == "" {
		sc.dial.Password = os.Getenv("HEADROOM_NATS_PASSWORD")
	}
	if sc.dial.Token == "" {
		sc.dial.Token = os.Getenv("HEADROOM_NATS_TOKEN")
	}
	var err error
	if sc.log, err = sc.eng.logger(stderr); err != nil {
		return nil, err
	}
	if sc.rules, err = rf.rules(); err != nil {
		return nil, err
	}
	sc.horizon, sc.engine = rf.horizon, rf.engine
	return &sc, nil
}

// run serves until ctx is done, then stops cleanly.
func (sc *sidecar) run(ctx context.Context) error {
	subjects := stream.Subjects{Prefix: sc.eng.prefix}
	if err := subjects.Check(); err != nil {
		return err
	}
	format, err := stream.ParseFormat(sc.eng.format)
	if err != nil {
		return err
	}
	if sc.dial.URL == "" && sc.embedded == nil {
		host, portStr, err := net.SplitHostPort(sc.listen)
		if err != nil {
			return fmt.Errorf("--listen: %w", err)
		}
		port, err := strconv.Atoi(portStr)
		if err != nil {
			return fmt.Errorf("--listen port: %w", err)
		}
		if port == 0 {
			port = -1
		}
		if ip := net.ParseIP(host); host != "localhost" && (ip == nil || !ip.IsLoopback()) {
			// The embedded server has no authentication of its own.
			sc.log.Warn().Str("listen", sc.listen).Msg("the embedded NATS server accepts anyone who can reach this address; bind it to loopback or run a NATS server with authentication")
		}
		if err := os.MkdirAll(sc.dataDir, 0o750); err != nil {
			return fmt.Errorf("data directory: %w", err)
		}
		emb, err := stream.StartEmbedded(ctx, stream.EmbeddedConfig{Host: host, Port: port, DataDir: sc.dataDir, Log: sc.log})
		if err != nil {
			return err
		}
		defer emb.Shutdown()
		sc.embedded = emb
		sc.log.Info().Str("url", emb.URL()).Str("publish_to", subjects.PointsBase()+".<anything>").Msg("embedded NATS server ready; point producers at this URL")
	}
	d := sc.dial
	d.Log = sc.log
	if d.URL == "" {
		d.Embedded = sc.embedded
	}
	cctx, cancel := context.WithTimeout(ctx, 10*time.Second)
	nc, err := d.Connect(cctx)
	cancel()
	if err != nil {
		return err
	}
	defer nc.Close()

	var (
		snaps stream.Snapshots
		from  stream.Checkpoint
		store *state.Store
	)
	if sc.dur.on {
		if snaps, err = sc.snapshots(ctx, nc); err != nil {
			return err
		}
		began := time.Now()
		store, from = stream.LoadState(ctx, snaps, sc.eng.storeConfig(), sc.log)
		if store != nil {
			sc.log.Info().Str("from", snaps.String()).Int("series", store.Len()).Uint64("seq", from.Seq).
				Dur("took", time.Since(began)).Msg("state restored")
		}
	}
	if store == nil {
		if store, err = sc.eng.store(); err != nil {
			return err
		}
	}
	pub := stream.NewPublisher(nc, subjects, format, sc.log)
	if sc.dur.on {
		if err := pub.UseJetStream(4096); err != nil {
			return err
		}
	}
	proc, err := stream.NewProcessor(store, pub, sc.eng.config(sc.rules, sc.horizon, sc.engine))
	if err != nil {
		return err
	}
	proc.Adopt(from.Rules)
	for _, r := range proc.Rules() {
		sc.log.Info().Str("rule", r.Name).Str("match", r.Match.String()).Float64("threshold", r.Threshold).
			Str("direction", r.Direction.String()).Dur("horizon", r.Horizon).Msg("rule")
	}
	var ready func()
	if sc.ready != nil {
		// The client's own redaction hides a password, not a token.
		url := stream.Redact(nc.ConnectedUrl())
		if sc.embedded != nil {
			url = sc.embedded.URL()
		}
		ready = func() { sc.ready(url, proc) }
	}
	ingestCtx, stopIngest := context.WithCancel(ctx)
	defer stopIngest()
	errc := make(chan error, 1)
	var dur *stream.Durable
	if sc.dur.on {
		d := &stream.Durable{
			Conn: nc, Processor: proc, Snapshots: snaps, From: from, Subjects: subjects,
			Consumer: sc.dur.name, MaxAge: sc.dur.retain, MaxBytes: sc.dur.retainBytes,
			Every: sc.dur.every, Publisher: pub, Ready: ready, Log: sc.log,
			Events: &stream.EventsStream{MaxAge: sc.dur.retain, MaxBytes: sc.dur.eventBytes},
		}
		if sc.eng.idleExpiry > 0 {
			d.Sweep = 5 * time.Second
		}
		if sc.eng.subscribers > 1 {
			// A snapshot must be the state after exactly the messages up
			// to its sequence, so one goroutine applies them in order.
			sc.log.Warn().Int("subscribers", sc.eng.subscribers).Msg("--subscribers is ignored with --durable: one consumer applies the stream in order")
		}
		dur = d
		go func() { errc <- d.Run(ingestCtx) }()
	} else {
		in := stream.Ingest{Conn: nc, Subject: subjects.Points(), Processor: proc, Subscribers: sc.eng.subscribers, Ready: ready, Log: sc.log}
		go func() { errc <- in.Run(ingestCtx) }()
	}
	sc.tend(ctx, proc, pub, store, dur, errc)
	stopIngest()
	err = <-errc
	// Publishes are settled so consumers get every record before we go.
	fctx, fcancel := context.WithTimeout(context.Background(), 10*time.Second)
	if serr := pub.Settle(fctx); serr != nil {
		sc.log.Warn().Err(serr).Msg("publishes not settled at shutdown")
	}
	fcancel()
	st := proc.Stats()
	sc.log.Info().Uint64("messages", st.Messages).Uint64("points", st.Points).Uint64("rejected", st.Rejected).
		Uint64("forecasts", st.Forecasts).Uint64("breaches", st.Breaches).Int("series", store.Len()).Msg("stopped")
	return err
}

// snapshots returns where durable mode keeps its snapshots: a directory
// if one is given or the server is embedded, else a JetStream object
// store.
func (sc *sidecar) snapshots(ctx context.Context, nc *nats.Conn) (stream.Snapshots, error) {
	dir := sc.dur.snapDir
	if dir == "" && sc.dial.URL == "" {
		dir = filepath.Join(sc.dataDir, "snapshots")
	}
	if dir != "" {
		return stream.DirSnapshots{Dir: dir, Name: sc.dur.name}, nil
	}
	js, err := jetstream.New(nc)
	if err != nil {
		return nil, fmt.Errorf("jetstream: %w", err)
	}
	cctx, cancel := context.WithTimeout(ctx, 10*time.Second)
	defer cancel()
	return stream.OpenBucketSnapshots(cctx, js, sc.dur.snapBucket, sc.dur.name)
}

// tend sweeps idle series out of the store every few seconds, unless dur
// is set (durable ingest sweeps between messages and counts them there),
// and logs the counters once a minute, so an operator sees the rates
// without scraping anything, until ctx is done or ingest fails, in which
// case its error is put back on errc.
func (sc *sidecar) tend(ctx context.Context, proc *stream.Processor, pub *stream.Publisher, store *state.Store, dur *stream.Durable, errc chan error) {
	sweep := time.NewTicker(5 * time.Second)
	defer sweep.Stop()
	report := time.NewTicker(time.Minute)
	defer report.Stop()
	prev, last, failed, expired := proc.Stats(), time.Now(), pub.Failed(), 0
	var sweptBefore, snaps, snapsFailed uint64
	if dur != nil {
		sweptBefore, snaps, snapsFailed = dur.Expired(), dur.Snapshotted(), dur.SnapshotsFailed()
	}
	for {
		select {
		case <-ctx.Done():
			return
		case err := <-errc:
			errc <- err
			return
		case now := <-sweep.C:
			if dur != nil {
				n := dur.Expired()
				expired += int(n - sweptBefore)
				sweptBefore = n
				continue
			}
			// The wall clock caps the reference, so one point stamped far
			// ahead cannot make every other series look idle.
			expired += store.Expire(now.UnixMilli())
		case now := <-report.C:
			st := proc.Stats()
			secs := now.Sub(last).Seconds()
			ev := sc.log.Info().Float64("points_per_s", float64(st.Points-prev.Points)/secs).
				Uint64("rejected", st.Rejected-prev.Rejected).Uint64("forecasts", st.Forecasts-prev.Forecasts).
				Uint64("breaches", st.Breaches-prev.Breaches).Uint64("publish_failed", pub.Failed()-failed).
				Int("expired", expired).Int("series", store.Len())
			if dur != nil {
				ev = ev.Uint64("applied_seq", dur.Applied()).Uint64("snapshots", dur.Snapshotted()-snaps).
					Uint64("snapshots_failed", dur.SnapshotsFailed()-snapsFailed)
				snaps, snapsFailed = dur.Snapshotted(), dur.SnapshotsFailed()
			}
			ev.Msg("last minute")
			prev, last, failed, expired = st, now, pub.Failed(), 0
		}
	}
}
