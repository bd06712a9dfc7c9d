package stream

import (
	"context"
	"errors"
	"fmt"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/rs/zerolog"
)

// Ingest subscribes to the points subject and hands every message to a
// Processor worker. With one subscriber, messages are applied in the order
// the server delivers them; more subscribers share the subject as a queue
// group and apply messages in parallel, which the store supports, at the
// cost of reordering between messages (the store's lateness window absorbs
// small reorderings; larger ones are rejected as late).
type Ingest struct {
	Conn        *nats.Conn
	Subject     string // default Subjects{}.Points()
	Processor   *Processor
	Subscribers int    // default 1
	Queue       string // queue group when Subscribers > 1; default "headroom-ingest"
	Ready       func() // called once the subscriptions are in place
	Log         zerolog.Logger
}

// Run subscribes and blocks until ctx is done, then drains the
// subscriptions so that messages already received are applied.
func (in *Ingest) Run(ctx context.Context) error {
	if in.Conn == nil || in.Processor == nil {
		return errors.New("stream: ingest needs a connection and a processor")
	}
	subject := in.Subject
	if subject == "" {
		subject = Subjects{}.Points()
	}
	n := max(in.Subscribers, 1)
	queue := in.Queue
	if queue == "" {
		queue = "headroom-ingest"
	}
	subs := make([]*nats.Subscription, 0, n)
	defer func() {
		for _, s := range subs {
			_ = s.Unsubscribe()
		}
	}()
	for i := 0; i < n; i++ {
		w := in.Processor.NewWorker()
		handler := func(m *nats.Msg) { w.Handle(m.Subject, m.Data) }
		var (
			s   *nats.Subscription
			err error
		)
		if n == 1 {
			s, err = in.Conn.Subscribe(subject, handler)
		} else {
			s, err = in.Conn.QueueSubscribe(subject, queue, handler)
		}
		if err != nil {
			return fmt.Errorf("stream: subscribe %s: %w", subject, err)
		}
		// Bursts are absorbed here rather than dropped as a slow consumer.
		if err := s.SetPendingLimits(1<<20, 1<<30); err != nil {
			return fmt.Errorf("stream: pending limits: %w", err)
		}
		subs = append(subs, s)
	}
	fctx, cancel := context.WithTimeout(ctx, 10*time.Second)
	err := in.Conn.FlushWithContext(fctx)
	cancel()
	if err != nil && ctx.Err() == nil {
		return fmt.Errorf("stream: flush subscriptions: %w", err)
	}
	in.Log.Info().Str("subject", subject).Int("subscribers", n).Msg("ingesting")
	if in.Ready != nil {
		in.Ready()
	}
	<-ctx.Done()
	return in.drain(subs)
}

// drain stops new deliveries and waits, bounded, for pending messages.
func (in *Ingest) drain(subs []*nats.Subscription) error {
	deadline := time.Now().Add(10 * time.Second)
	for _, s := range subs {
		_ = s.Drain()
	}
	for _, s := range subs {
		for s.IsValid() && time.Now().Before(deadline) {
			time.Sleep(5 * time.Millisecond)
		}
	}
	return nil
}
