package stream

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"sync"
	"sync/atomic"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"
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
// encode and a copy. While the connection is down the buffer, bounded by
// the connection's reconnect buffer (64 MiB, see Dial), holds what is
// published; what does not fit is counted by Failed and logged.
//
// After UseJetStream, records go through JetStream instead: each publish
// is acknowledged by the server once stored, and Settle waits for the
// acknowledgements, retrying what failed.
type Publisher struct {
	nc       *nats.Conn
	subjects Subjects
	format   Format
	log      zerolog.Logger

	js      jetstream.JetStream // nil: plain publishes
	mu      sync.Mutex
	retry   []*nats.Msg // JetStream publishes that failed, for Settle
	retried atomic.Uint64

	failed atomic.Uint64
}

// maxRetry bounds the failed JetStream publishes kept for another try.
const maxRetry = 1 << 16

// NewPublisher returns a Publisher on nc.
func NewPublisher(nc *nats.Conn, subjects Subjects, format Format, log zerolog.Logger) *Publisher {
	return &Publisher{nc: nc, subjects: subjects, format: format, log: log}
}

// Failed counts records that could not be encoded or handed to the
// connection, and in JetStream mode those whose storage was never
// confirmed, even after Settle retried them.
func (p *Publisher) Failed() uint64 { return p.failed.Load() }

// Retried counts JetStream publishes that Settle sent again.
func (p *Publisher) Retried() uint64 { return p.retried.Load() }

// UseJetStream makes p publish through JetStream, with at most maxPending
// publishes awaiting acknowledgement (a publish beyond that waits). A
// stream must capture the record subjects: see EnsureEvents.
func (p *Publisher) UseJetStream(maxPending int) error {
	js, err := jetstream.New(p.nc,
		jetstream.WithPublishAsyncMaxPending(max(maxPending, 1)),
		jetstream.WithPublishAsyncErrHandler(p.asyncFailed))
	if err != nil {
		return fmt.Errorf("stream: jetstream: %w", err)
	}
	p.js = js
	return nil
}

// asyncFailed keeps a publish the server did not confirm for Settle.
func (p *Publisher) asyncFailed(_ jetstream.JetStream, m *nats.Msg, err error) {
	p.mu.Lock()
	keep := len(p.retry) < maxRetry
	if keep {
		p.retry = append(p.retry, m)
	}
	p.mu.Unlock()
	if !keep {
		p.fail(err, m.Subject)
	}
}

// Settle waits until every JetStream publish so far is acknowledged, then
// sends again, one at a time, those that failed; what fails again is
// counted by Failed and logged. It returns an error if ctx ends first or
// if some record could not be stored. Without JetStream it flushes the
// connection.
func (p *Publisher) Settle(ctx context.Context) error {
	if p.js == nil {
		if _, ok := ctx.Deadline(); !ok {
			// The connection's flush insists on a deadline.
			var cancel context.CancelFunc
			ctx, cancel = context.WithTimeout(ctx, 10*time.Second)
			defer cancel()
		}
		if err := p.nc.FlushWithContext(ctx); err != nil {
			return fmt.Errorf("stream: flush: %w", err)
		}
		return nil
	}
	select {
	case <-p.js.PublishAsyncComplete():
	case <-ctx.Done():
		return fmt.Errorf("stream: waiting for publish acknowledgements: %w", ctx.Err())
	}
	p.mu.Lock()
	retry := p.retry
	p.retry = nil
	p.mu.Unlock()
	var lost int
	for _, m := range retry {
		p.retried.Add(1)
		m.Reply = ""
		if _, err := p.js.PublishMsg(ctx, m); err != nil {
			lost++
			p.fail(err, m.Subject)
		}
	}
	if lost > 0 {
		return fmt.Errorf("stream: %d records could not be stored", lost)
	}
	return nil
}

// Forecast publishes a forecast record.
func (p *Publisher) Forecast(r *ForecastRecord) { p.send(p.subjects.Forecast(r.Token), "", r) }

// Breach publishes a breach event. In JetStream mode its id is the
// message id, so that the server drops a replayed copy within the
// stream's duplicate window.
func (p *Publisher) Breach(r *BreachRecord) { p.send(p.subjects.Breach(r.Token), r.ID, r) }

// Reject publishes a rejection.
func (p *Publisher) Reject(r *RejectRecord) { p.send(p.subjects.Rejected(), "", r) }

func (p *Publisher) send(subject, id string, v any) {
	var (
		b   []byte
		err error
	)
	if p.format == Msgpack {
		b, err = msgpack.Marshal(v)
	} else {
		b, err = json.Marshal(v)
	}
	switch {
	case err != nil:
	case p.js != nil:
		m := &nats.Msg{Subject: subject, Data: b}
		if id != "" {
			m.Header = nats.Header{jetstream.MsgIDHeader: []string{id}}
		}
		if _, err = p.js.PublishMsgAsync(m); err != nil && !errors.Is(err, nats.ErrConnectionClosed) {
			// Too many awaiting acknowledgement for too long: keep it
			// for Settle rather than lose it.
			p.asyncFailed(p.js, m, err)
			return
		}
	default:
		err = p.nc.Publish(subject, b)
	}
	if err != nil {
		p.fail(err, subject)
	}
}

// fail counts a record that could not be published and logs the first of
// every thousand.
func (p *Publisher) fail(err error, subject string) {
	if p.failed.Add(1)%1000 == 1 {
		p.log.Warn().Err(err).Str("subject", subject).Uint64("failed", p.failed.Load()).Msg("publish failed")
	}
}
