package stream

import (
	"encoding/json"
	"fmt"
	"sync/atomic"

	"github.com/nats-io/nats.go"
	"github.com/rs/zerolog"
	"github.com/vmihailenco/msgpack/v5"
)

// Format is the encoding of published records.
type Format int

// Record encodings.
const (
	JSON Format = iota
	Msgpack
)

// ParseFormat reads "json" or "msgpack".
func ParseFormat(s string) (Format, error) {
	switch s {
	case "", "json":
		return JSON, nil
	case "msgpack":
		return Msgpack, nil
	}
	return JSON, fmt.Errorf("stream: unknown record format %q (want json or msgpack)", s)
}

// Publisher is the Emitter that sends records to NATS. nats.Conn buffers
// publishes and flushes them from its own goroutine, so a call costs an
// encode and a copy.
type Publisher struct {
	nc       *nats.Conn
	subjects Subjects
	format   Format
	log      zerolog.Logger

	failed atomic.Uint64
}

// NewPublisher returns a Publisher on nc.
func NewPublisher(nc *nats.Conn, subjects Subjects, format Format, log zerolog.Logger) *Publisher {
	return &Publisher{nc: nc, subjects: subjects, format: format, log: log}
}

// Failed counts records that could not be encoded or handed to the connection.
func (p *Publisher) Failed() uint64 { return p.failed.Load() }

// Forecast publishes a forecast record.
func (p *Publisher) Forecast(r *ForecastRecord) { p.send(p.subjects.Forecast(r.Token), r) }

// Breach publishes a breach event.
func (p *Publisher) Breach(r *BreachRecord) { p.send(p.subjects.Breach(r.Token), r) }

// Reject publishes a rejection.
func (p *Publisher) Reject(r *RejectRecord) { p.send(p.subjects.Rejected(), r) }

func (p *Publisher) send(subject string, v any) {
	var (
		b   []byte
		err error
	)
	if p.format == Msgpack {
		b, err = msgpack.Marshal(v)
	} else {
		b, err = json.Marshal(v)
	}
	if err == nil {
		err = p.nc.Publish(subject, b)
	}
	if err != nil {
		if p.failed.Add(1)%1000 == 1 {
			p.log.Warn().Err(err).Str("subject", subject).Uint64("failed", p.failed.Load()).Msg("publish failed")
		}
	}
}
