package main

import (
	"context"
	"flag"
	"fmt"
	"io"
	"net"
	"os"
	"strconv"
	"time"

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
	rules    []forecast.Rule
	horizon  time.Duration
	engine   string
	log      zerolog.Logger
	ready    func(url string, p *stream.Processor) // called once ingesting
	embedded *stream.Embedded
}

func runServe(ctx context.Context, args []string, stdout, stderr io.Writer) error {
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
	fs.Usage = func() {
		fmt.Fprintln(fs.Output(), "Usage: headroom serve [flags]\n\nRun the sidecar: ingest points, publish forecasts and breach events.\n\nFlags:")
		fs.PrintDefaults()
	}
	rf.set = set
	if err := parse(fs, args, set); err != nil {
		return err
	}
	if sc.dial.Password == "" {
		sc.dial.Password = os.Getenv("HEADROOM_NATS_PASSWORD")
	}
	if sc.dial.Token == "" {
		sc.dial.Token = os.Getenv("HEADROOM_NATS_TOKEN")
	}
	var err error
	if sc.log, err = sc.eng.logger(stderr); err != nil {
		return err
	}
	if sc.rules, err = rf.rules(); err != nil {
		return err
	}
	sc.horizon, sc.engine = rf.horizon, rf.engine
	return sc.run(ctx)
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

	store, err := sc.eng.store()
	if err != nil {
		return err
	}
	pub := stream.NewPublisher(nc, subjects, format, sc.log)
	proc, err := stream.NewProcessor(store, pub, sc.eng.config(sc.rules, sc.horizon, sc.engine))
	if err != nil {
		return err
	}
	for _, r := range proc.Rules() {
		sc.log.Info().Str("rule", r.Name).Str("match", r.Match.String()).Float64("threshold", r.Threshold).
			Str("direction", r.Direction.String()).Dur("horizon", r.Horizon).Msg("rule")
	}
	in := stream.Ingest{Conn: nc, Subject: subjects.Points(), Processor: proc, Subscribers: sc.eng.subscribers, Log: sc.log}
	if sc.ready != nil {
		// The client's own redaction hides a password, not a token.
		url := stream.Redact(nc.ConnectedUrl())
		if sc.embedded != nil {
			url = sc.embedded.URL()
		}
		in.Ready = func() { sc.ready(url, proc) }
	}
	ingestCtx, stopIngest := context.WithCancel(ctx)
	defer stopIngest()
	errc := make(chan error, 1)
	go func() { errc <- in.Run(ingestCtx) }()
	sc.tend(ctx, proc, pub, store)
	stopIngest()
	err = <-errc
	// Flush what was published so consumers get every record before we go.
	fctx, fcancel := context.WithTimeout(context.Background(), 5*time.Second)
	_ = nc.FlushWithContext(fctx)
	fcancel()
	st := proc.Stats()
	sc.log.Info().Uint64("messages", st.Messages).Uint64("points", st.Points).Uint64("rejected", st.Rejected).
		Uint64("forecasts", st.Forecasts).Uint64("breaches", st.Breaches).Int("series", store.Len()).Msg("stopped")
	return err
}

// tend sweeps idle series out of the store every few seconds and logs the
// counters once a minute, so an operator sees the rates without scraping
// anything, until ctx is done.
func (sc *sidecar) tend(ctx context.Context, proc *stream.Processor, pub *stream.Publisher, store *state.Store) {
	sweep := time.NewTicker(5 * time.Second)
	defer sweep.Stop()
	report := time.NewTicker(time.Minute)
	defer report.Stop()
	prev, last, failed, expired := proc.Stats(), time.Now(), pub.Failed(), 0
	for {
		select {
		case <-ctx.Done():
			return
		case now := <-sweep.C:
			// The wall clock caps the reference, so one point stamped far
			// ahead cannot make every other series look idle.
			expired += store.Expire(now.UnixMilli())
		case now := <-report.C:
			st := proc.Stats()
			secs := now.Sub(last).Seconds()
			sc.log.Info().Float64("points_per_s", float64(st.Points-prev.Points)/secs).
				Uint64("rejected", st.Rejected-prev.Rejected).Uint64("forecasts", st.Forecasts-prev.Forecasts).
				Uint64("breaches", st.Breaches-prev.Breaches).Uint64("publish_failed", pub.Failed()-failed).
				Int("expired", expired).Int("series", store.Len()).Msg("last minute")
			prev, last, failed, expired = st, now, pub.Failed(), 0
		}
	}
}
