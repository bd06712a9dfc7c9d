package stream

import (
	"context"
	"errors"
	"fmt"
	"io"
	"sync/atomic"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"
	"github.com/rs/zerolog"
)

// Durable ingests points from a JetStream stream, in stream order, and
// keeps the state recoverable: it acknowledges a message once its points
// are applied, snapshots the store with the sequence it covers every so
// often, and on start resumes from the sequence after the restored
// snapshot's. A sidecar that crashes thus loses no point the stream still
// retains, and ends, once it has caught up, in the state an uninterrupted
// run would have reached on the same messages.
//
// One goroutine applies the messages and writes the snapshots, so that a
// snapshot is the state after exactly the messages up to its sequence.
type Durable struct {
	Conn      *nats.Conn
	Processor *Processor
	Snapshots Snapshots
	// From is the checkpoint of the snapshot the Processor's store was
	// restored from; zero when it starts empty, which replays all the
	// stream retains.
	From     Checkpoint
	Subjects Subjects
	Stream   string // points stream; default "HEADROOM_POINTS"
	Consumer string // durable consumer; default "headroom"
	// MaxAge and MaxBytes bound what a points stream created here
	// retains; defaults 24h and 4 GiB. A snapshot older than the
	// retention leaves a gap, which Run logs.
	MaxAge   time.Duration
	MaxBytes int64
	// Every is the snapshot cadence; default one minute. Snapshots come
	// no closer than fifty times the time the last one took.
	Every time.Duration
	// Sweep is how often idle series are expired, in the times the
	// server stored the messages at; 0 never. The sweep runs between
	// messages, like the snapshots.
	Sweep time.Duration
	// Publisher, if set, is settled before each snapshot, so that every
	// record of the state a snapshot covers has been stored; with
	// Events it publishes through JetStream to an events stream.
	Publisher *Publisher
	Events    *EventsStream
	Ready     func() // called once consuming
	Log       zerolog.Logger

	expired, snapshots, failed atomic.Uint64
	last                       atomic.Uint64
}

// EventsStream configures the stream that keeps published records in
// durable mode.
type EventsStream struct {
	Name      string        // default "HEADROOM_EVENTS"
	MaxAge    time.Duration // default 24h
	MaxBytes  int64         // default 1 GiB
	Duplicate time.Duration // duplicate window for breach event ids; default 10 minutes
}

// Default names and limits of durable mode.
const (
	DefaultPointsStream = "HEADROOM_POINTS"
	DefaultEventsStream = "HEADROOM_EVENTS"
	DefaultConsumer     = "headroom"
)

// Expired counts series removed by the sweep.
func (d *Durable) Expired() uint64 { return d.expired.Load() }

// Snapshotted counts snapshots written.
func (d *Durable) Snapshotted() uint64 { return d.snapshots.Load() }

// SnapshotsFailed counts snapshots that could not be written.
func (d *Durable) SnapshotsFailed() uint64 { return d.failed.Load() }

// Applied returns the last stream sequence applied.
func (d *Durable) Applied() uint64 { return d.last.Load() }

// Run consumes until ctx is done, then stops fetching, settles the
// publisher and writes a final snapshot, whose error it returns. A
// periodic snapshot that fails is logged, counted and tried again at the
// next cadence. Run returns early on an error that makes going on
// pointless, such as a closed connection.
func (d *Durable) Run(ctx context.Context) error {
	if d.Conn == nil || d.Processor == nil || d.Snapshots == nil {
		return errors.New("stream: durable ingest needs a connection, a processor and snapshots")
	}
	js, err := jetstream.New(d.Conn)
	if err != nil {
		return fmt.Errorf("stream: jetstream: %w", err)
	}
	info, err := d.ensurePoints(ctx, js)
	if err != nil {
		return err
	}
	if d.Events != nil {
		if err := EnsureEvents(ctx, js, d.Subjects, *d.Events); err != nil {
			return err
		}
	}
	start := d.resumeAt(info)
	cons, err := d.consumer(ctx, js, start)
	if err != nil {
		return err
	}
	it, err := cons.Messages(jetstream.PullMaxMessages(512))
	if err != nil {
		return fmt.Errorf("stream: consume %s: %w", d.stream(), err)
	}
	defer it.Stop()
	d.Log.Info().Str("stream", d.stream()).Str("consumer", d.consumer0()).Uint64("from_seq", start).
		Str("snapshots", d.Snapshots.String()).Msg("ingesting durably")
	if d.Ready != nil {
		d.Ready()
	}

	// The state now stands just before start: after the snapshot's
	// sequence, or, past a gap or on a stream made anew, where this
	// stream's messages begin.
	cp := Checkpoint{Stream: info.Config.Name, Created: info.Created, Seq: start - 1, Rules: d.Processor.RuleNames(), Swept: d.From.Swept}
	d.last.Store(cp.Seq)
	w := d.Processor.NewWorker()
	every := d.Every
	if every <= 0 {
		every = time.Minute
	}
	nextSnap := time.Now().Add(every)
	sweep := max(d.Sweep.Milliseconds(), 1)
	store := d.Processor.Store()
	dirty := false
	for {
		if ctx.Err() != nil {
			break
		}
		msg, err := it.Next(jetstream.NextMaxWait(250 * time.Millisecond))
		switch {
		case err == nil:
			meta, merr := msg.Metadata()
			if merr != nil {
				// Not a stream message: nothing to apply or acknowledge.
				d.Log.Warn().Err(merr).Msg("message without stream metadata")
				continue
			}
			// A message redelivered after its sequence was applied, if
			// the server sends one, is acknowledged and skipped.
			if seq := meta.Sequence.Stream; seq > cp.Seq {
				w.Handle(msg.Subject(), msg.Data())
				cp.Seq = seq
				d.last.Store(seq)
				dirty = true
				// Idle series are swept once per Sweep of the times the
				// server stored the messages at, not of the wall clock, and
				// over the whole store: a replay sweeps after the same
				// messages with the same reference, and forgets the same
				// series. The storage time also caps the reference, as the
				// wall clock does in Store.Expire.
				if at := meta.Timestamp.UnixMilli(); d.Sweep > 0 && at/sweep != cp.Swept {
					cp.Swept = at / sweep
					d.expired.Add(uint64(store.ExpireAll(at)))
				}
			}
			// The acknowledgement only moves the consumer; recovery goes
			// by the snapshot's sequence, so one lost here costs nothing.
			_ = msg.Ack()
		case errors.Is(err, nats.ErrTimeout):
		case errors.Is(err, jetstream.ErrMsgIteratorClosed):
			if ctx.Err() == nil {
				return fmt.Errorf("stream: consuming %s stopped: %w", d.stream(), err)
			}
		default:
			d.Log.Warn().Err(err).Msg("consuming")
		}
		now := time.Now()
		if dirty && now.After(nextSnap) && ctx.Err() == nil {
			// A snapshot begun is finished, even if ctx ends meanwhile.
			// One that fails (a full disk, an unreachable object store) is
			// tried again at the next cadence: ingest goes on meanwhile,
			// and the stream still holds what a restart would replay.
			if err := d.snapshot(context.WithoutCancel(ctx), &cp); err != nil {
				d.failed.Add(1)
				d.Log.Error().Err(err).Uint64("failed", d.failed.Load()).Msg("snapshot failed; retrying at the next cadence")
			} else {
				dirty = false
			}
			// Ingest waits while a snapshot is written: spacing them by
			// fifty times what the last one took keeps that under 2 %
			// of the time however many series there are.
			nextSnap = time.Now().Add(max(every, 50*time.Since(now)))
		}
	}
	it.Stop()
	if !dirty {
		return nil
	}
	// The final snapshot outlives ctx.
	fctx, cancel := context.WithTimeout(context.WithoutCancel(ctx), time.Minute)
	defer cancel()
	return d.snapshot(fctx, &cp)
}

// snapshot settles the publisher and writes the store with cp.
func (d *Durable) snapshot(ctx context.Context, cp *Checkpoint) error {
	began := time.Now()
	if d.Publisher != nil {
		sctx, cancel := context.WithTimeout(ctx, 30*time.Second)
		err := d.Publisher.Settle(sctx)
		cancel()
		if err != nil {
			// The records are counted as failed; the snapshot goes on, as
			// holding it back would not bring them back.
			d.Log.Error().Err(err).Msg("records published before this snapshot were not all stored")
		}
	}
	cp.Written = time.Now().UTC()
	store := d.Processor.Store()
	err := d.Snapshots.Save(ctx, func(w io.Writer) error { return WriteSnapshot(w, store, *cp) })
	if err != nil {
		return fmt.Errorf("stream: snapshot at sequence %d: %w", cp.Seq, err)
	}
	d.snapshots.Add(1)
	d.Log.Debug().Uint64("seq", cp.Seq).Int("series", store.Len()).Dur("took", time.Since(began)).Msg("snapshot")
	return nil
}

func (d *Durable) stream() string {
	if d.Stream == "" {
		return DefaultPointsStream
	}
	return d.Stream
}

func (d *Durable) consumer0() string {
	if d.Consumer == "" {
		return DefaultConsumer
	}
	return d.Consumer
}

// ensurePoints returns the points stream, creating it when missing.
func (d *Durable) ensurePoints(ctx context.Context, js jetstream.JetStream) (*jetstream.StreamInfo, error) {
	s, err := js.Stream(ctx, d.stream())
	if errors.Is(err, jetstream.ErrStreamNotFound) {
		maxAge, maxBytes := d.MaxAge, d.MaxBytes
		if maxAge <= 0 {
			maxAge = 24 * time.Hour
		}
		if maxBytes <= 0 {
			maxBytes = 4 << 30
		}
		s, err = js.CreateStream(ctx, jetstream.StreamConfig{
			Name:        d.stream(),
			Description: "points for headroom",
			Subjects:    []string{d.Subjects.Points()},
			Retention:   jetstream.LimitsPolicy,
			MaxAge:      maxAge,
			MaxBytes:    maxBytes,
			Discard:     jetstream.DiscardOld,
			Storage:     jetstream.FileStorage,
		})
		if err == nil {
			d.Log.Info().Str("stream", d.stream()).Dur("max_age", maxAge).Int64("max_bytes", maxBytes).Msg("points stream created")
		}
	}
	if err != nil {
		return nil, fmt.Errorf("stream: points stream %s: %w", d.stream(), err)
	}
	info, err := s.Info(ctx)
	if err != nil {
		return nil, fmt.Errorf("stream: points stream %s: %w", d.stream(), err)
	}
	if info.Config.Retention != jetstream.LimitsPolicy {
		// Acknowledged messages leave a work-queue or interest stream, and
		// a restart could not replay them.
		return nil, fmt.Errorf("stream: points stream %s keeps messages by %s; durable ingest needs limits retention", d.stream(), info.Config.Retention)
	}
	return info, nil
}

// resumeAt returns the first sequence to apply, logging what the stream
// no longer holds.
func (d *Durable) resumeAt(info *jetstream.StreamInfo) uint64 {
	first := max(info.State.FirstSeq, 1)
	if d.From.Seq == 0 {
		return first
	}
	if d.From.Stream != info.Config.Name || !d.From.Created.Equal(info.Created) {
		d.Log.Warn().Str("snapshot_stream", d.From.Stream).Time("snapshot_stream_created", d.From.Created).
			Str("stream", info.Config.Name).Time("stream_created", info.Created).
			Msg("the snapshot is of another stream; applying this one from its start on top of it")
		return first
	}
	next := d.From.Seq + 1
	if next < first {
		d.Log.Warn().Uint64("from_seq", next).Uint64("first_seq", first).Uint64("lost", first-next).
			Msg("the stream no longer holds every message after the snapshot; those are lost")
		return first
	}
	return next
}

// consumer makes the durable consumer start at seq. A consumer left by a
// previous run stands where that run acknowledged, which may be past the
// snapshot, so it is made anew.
func (d *Durable) consumer(ctx context.Context, js jetstream.JetStream, seq uint64) (jetstream.Consumer, error) {
	name := d.consumer0()
	if err := js.DeleteConsumer(ctx, d.stream(), name); err != nil && !errors.Is(err, jetstream.ErrConsumerNotFound) {
		return nil, fmt.Errorf("stream: consumer %s: %w", name, err)
	}
	c, err := js.CreateConsumer(ctx, d.stream(), jetstream.ConsumerConfig{
		Durable:       name,
		Description:   "headroom durable ingest",
		DeliverPolicy: jetstream.DeliverByStartSequencePolicy,
		OptStartSeq:   seq,
		AckPolicy:     jetstream.AckExplicitPolicy,
		AckWait:       time.Minute,
		MaxAckPending: 8192,
		FilterSubject: d.Subjects.Points(),
	})
	if err != nil {
		return nil, fmt.Errorf("stream: consumer %s: %w", name, err)
	}
	return c, nil
}

// EnsureEvents creates the stream that keeps the records published on
// subjects when it is missing.
func EnsureEvents(ctx context.Context, js jetstream.JetStream, subjects Subjects, c EventsStream) error {
	name := c.Name
	if name == "" {
		name = DefaultEventsStream
	}
	_, err := js.Stream(ctx, name)
	if !errors.Is(err, jetstream.ErrStreamNotFound) {
		if err != nil {
			return fmt.Errorf("stream: events stream %s: %w", name, err)
		}
		return nil
	}
	cfg := jetstream.StreamConfig{
		Name:        name,
		Description: "forecast records, breach events and rejections from headroom",
		Subjects:    []string{subjects.AllForecasts(), subjects.AllBreaches(), subjects.Rejected()},
		Retention:   jetstream.LimitsPolicy,
		MaxAge:      c.MaxAge,
		MaxBytes:    c.MaxBytes,
		Discard:     jetstream.DiscardOld,
		Storage:     jetstream.FileStorage,
		Duplicates:  c.Duplicate,
	}
	if cfg.MaxAge <= 0 {
		cfg.MaxAge = 24 * time.Hour
	}
	if cfg.MaxBytes <= 0 {
		cfg.MaxBytes = 1 << 30
	}
	if cfg.Duplicates <= 0 {
		cfg.Duplicates = 10 * time.Minute
	}
	if cfg.Duplicates > cfg.MaxAge {
		cfg.Duplicates = cfg.MaxAge
	}
	if _, err := js.CreateStream(ctx, cfg); err != nil {
		return fmt.Errorf("stream: events stream %s: %w", name, err)
	}
	return nil
}
