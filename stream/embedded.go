package stream

import (
	"context"
	"errors"
	"fmt"
	"time"

	"github.com/nats-io/nats-server/v2/server"
	"github.com/rs/zerolog"
)

// Embedded is a nats-server run in this process: the default bus when no
// server URL is given, and the bus of every test that involves NATS.
type Embedded struct {
	srv *server.Server
}

// EmbeddedConfig configures an embedded server.
type EmbeddedConfig struct {
	Host      string // default 127.0.0.1
	Port      int    // default 4222; -1 picks a free port
	DataDir   string // JetStream storage; empty disables JetStream
	Log       zerolog.Logger
	ExtraOpts func(*server.Options) // tests use it for auth and TLS set-ups
}

// StartEmbedded starts a server and waits until it accepts connections.
func StartEmbedded(ctx context.Context, c EmbeddedConfig) (*Embedded, error) {
	opts := &server.Options{
		Host:                   c.Host,
		Port:                   c.Port,
		NoSigs:                 true,
		MaxPayload:             8 << 20,
		DisableJetStreamBanner: true,
	}
	if opts.Host == "" {
		opts.Host = "127.0.0.1"
	}
	if opts.Port == 0 {
		opts.Port = 4222
	}
	if c.DataDir != "" {
		opts.JetStream = true
		opts.StoreDir = c.DataDir
	}
	if c.ExtraOpts != nil {
		c.ExtraOpts(opts)
	}
	srv, err := server.NewServer(opts)
	if err != nil {
		return nil, fmt.Errorf("stream: embedded server: %w", err)
	}
	srv.SetLoggerV2(serverLog{c.Log}, false, false, false)
	go srv.Start()
	deadline := 10 * time.Second
	if d, ok := ctx.Deadline(); ok {
		deadline = time.Until(d)
	}
	if !srv.ReadyForConnections(deadline) {
		srv.Shutdown()
		return nil, errors.New("stream: embedded server did not become ready")
	}
	return &Embedded{srv: srv}, nil
}

// URL is the address producers and consumers connect to.
func (e *Embedded) URL() string { return e.srv.ClientURL() }

// Server exposes the server for in-process connections.
func (e *Embedded) Server() *server.Server { return e.srv }

// Shutdown stops the server and waits for it.
func (e *Embedded) Shutdown() {
	e.srv.Shutdown()
	e.srv.WaitForShutdown()
}

// serverLog routes the server's log lines into zerolog, one level down so
// that the server's notices do not drown the sidecar's own.
type serverLog struct{ l zerolog.Logger }

func (s serverLog) Noticef(f string, v ...any) {
	s.l.Debug().Str("component", "nats-server").Msgf(f, v...)
}
func (s serverLog) Warnf(f string, v ...any) {
	s.l.Warn().Str("component", "nats-server").Msgf(f, v...)
}
func (s serverLog) Fatalf(f string, v ...any) {
	s.l.Error().Str("component", "nats-server").Msgf(f, v...)
}
func (s serverLog) Errorf(f string, v ...any) {
	s.l.Error().Str("component", "nats-server").Msgf(f, v...)
}
func (s serverLog) Debugf(f string, v ...any) {}
func (s serverLog) Tracef(f string, v ...any) {}
