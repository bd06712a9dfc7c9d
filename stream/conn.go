package stream

import (
	"context"
	"fmt"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/rs/zerolog"
)

// Dial describes how to reach a NATS server. Secrets stay in this struct
// and are never logged.
type Dial struct {
	URL      string
	Creds    string // credentials file (JWT + NKey seed)
	User     string
	Password string
	Token    string
	NKeySeed string // file holding an NKey seed
	TLSCA    string // CA bundle to verify the server
	TLSCert  string // client certificate
	TLSKey   string // client key
	Name     string // connection name shown by the server
	Embedded *Embedded
	Log      zerolog.Logger
}

// Connect opens the connection, reconnecting forever on loss and logging
// each change of state. With Embedded set it connects in-process.
func (d Dial) Connect(ctx context.Context) (*nats.Conn, error) {
	name := d.Name
	if name == "" {
		name = "headroom"
	}
	opts := []nats.Option{
		nats.Name(name),
		nats.MaxReconnects(-1),
		nats.ReconnectWait(500 * time.Millisecond),
		nats.ReconnectBufSize(64 << 20),
		nats.DisconnectErrHandler(func(_ *nats.Conn, err error) {
			if err != nil {
				d.Log.Warn().Err(err).Msg("nats disconnected")
			}
		}),
		nats.ReconnectHandler(func(c *nats.Conn) {
			d.Log.Info().Str("url", c.ConnectedUrlRedacted()).Msg("nats reconnected")
		}),
		nats.ErrorHandler(func(_ *nats.Conn, s *nats.Subscription, err error) {
			ev := d.Log.Warn().Err(err)
			if s != nil {
				ev = ev.Str("subject", s.Subject)
			}
			ev.Msg("nats async error")
		}),
	}
	if d.Creds != "" {
		opts = append(opts, nats.UserCredentials(d.Creds))
	}
	if d.User != "" {
		opts = append(opts, nats.UserInfo(d.User, d.Password))
	}
	if d.Token != "" {
		opts = append(opts, nats.Token(d.Token))
	}
	if d.NKeySeed != "" {
		o, err := nats.NkeyOptionFromSeed(d.NKeySeed)
		if err != nil {
			return nil, fmt.Errorf("stream: nkey seed file: %w", err)
		}
		opts = append(opts, o)
	}
	if d.TLSCA != "" {
		opts = append(opts, nats.RootCAs(d.TLSCA))
	}
	if d.TLSCert != "" || d.TLSKey != "" {
		opts = append(opts, nats.ClientCert(d.TLSCert, d.TLSKey))
	}
	url := d.URL
	if d.Embedded != nil {
		opts = append(opts, nats.InProcessServer(d.Embedded.Server()))
		url = d.Embedded.URL()
	}
	if deadline, ok := ctx.Deadline(); ok {
		opts = append(opts, nats.Timeout(time.Until(deadline)))
	}
	nc, err := nats.Connect(url, opts...)
	if err != nil {
		return nil, fmt.Errorf("stream: connect to %s: %w", redact(url), err)
	}
	return nc, nil
}

// redact removes user information from a URL before it is logged.
func redact(url string) string {
	for i := 0; i+2 < len(url); i++ {
		if url[i:i+3] == "://" {
			rest := url[i+3:]
			for j := 0; j < len(rest); j++ {
				switch rest[j] {
				case '@':
					return url[:i+3] + "[redacted]@" + rest[j+1:]
				case '/':
					return url
				}
			}
			return url
		}
	}
	return url
}
