package stream

import (
	"bufio"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"time"

	"github.com/rs/zerolog"

	"github.com/headroom-dev/headroom/forecast"
	"github.com/headroom-dev/headroom/state"
)

// Checkpoint is what a snapshot records beside the store: where in the
// points stream the state stands, and what the incidents in it refer to.
type Checkpoint struct {
	Stream string `json:"stream"`
	// Created is when the stream was created, which tells a stream that
	// was deleted and made again, with sequences starting over, from the
	// one the snapshot covers.
	Created time.Time `json:"created"`
	Seq     uint64    `json:"seq"`   // last stream sequence applied
	Rules   []string  `json:"rules"` // rule names by index, as incidents refer to them
	// Swept is the storage time of the last idle sweep, in units of the
	// sweep cadence (see Durable.Sweep), so that a replay sweeps where
	// the first run did.
	Swept   int64     `json:"swept"`
	Written time.Time `json:"written"`
}

// WriteSnapshot writes store and cp to w. Writers to the store must be
// held off while it runs (see state.Store.WriteSnapshot).
func WriteSnapshot(w io.Writer, store *state.Store, cp Checkpoint) error {
	meta, err := json.Marshal(cp)
	if err != nil {
		return fmt.Errorf("stream: checkpoint: %w", err)
	}
	bw := bufio.NewWriterSize(w, 1<<20)
	if err := store.WriteSnapshot(bw, meta); err != nil {
		return fmt.Errorf("stream: snapshot: %w", err)
	}
	if err := bw.Flush(); err != nil {
		return fmt.Errorf("stream: snapshot: %w", err)
	}
	return nil
}

// ReadSnapshot restores a store configured by cfg, and its checkpoint,
// from r.
func ReadSnapshot(r io.Reader, cfg state.Config) (*state.Store, Checkpoint, error) {
	store, meta, err := state.Restore(cfg, bufio.NewReaderSize(r, 1<<20))
	if err != nil {
		return nil, Checkpoint{}, fmt.Errorf("stream: restore: %w", err)
	}
	var cp Checkpoint
	if err := json.Unmarshal(meta, &cp); err != nil {
		return nil, Checkpoint{}, fmt.Errorf("stream: restore: checkpoint: %w", err)
	}
	return store, cp, nil
}

// Adopt makes the incidents of a restored store refer to p's rules:
// those of a rule that kept its name follow it to its index now, those of
// a rule no longer configured are dropped, and every series matches its
// selectors again. rules are the names the snapshot's incidents refer to
// (Checkpoint.Rules). With the same rules in the same order it does
// nothing. Writers must be held off while it runs.
func (p *Processor) Adopt(rules []string) {
	if sameNames(rules, p.cfg.Rules) {
		return
	}
	now := make(map[string]uint16, len(p.cfg.Rules))
	for i, r := range p.cfg.Rules {
		now[r.Name] = uint16(i)
	}
	// to[i] is the index now of the rule at index i then, or -1.
	to := make([]int, len(rules))
	for i, name := range rules {
		to[i] = -1
		if j, ok := now[name]; ok {
			to[i] = int(j)
		}
	}
	const gone = ^uint16(0) // no rule has this index: at most 64 are supported
	for part := range p.store.Partitions() {
		p.store.Range(part, func(se *state.Series) bool {
			memo := se.Memo()
			memo.RulesSet, memo.Rules = false, 0
			drop := 0
			incs := se.Incidents()
			for i := range incs {
				if r := int(incs[i].Rule); r < len(to) && to[r] >= 0 {
					incs[i].Rule = uint16(to[r])
				} else {
					incs[i].Rule = gone
					drop++
				}
			}
			for range drop {
				se.DropIncident(gone)
			}
			return true
		})
	}
}

// RuleNames returns the names of p's rules by index, for Checkpoint.Rules.
func (p *Processor) RuleNames() []string {
	names := make([]string, len(p.cfg.Rules))
	for i, r := range p.cfg.Rules {
		names[i] = r.Name
	}
	return names
}

func sameNames(names []string, rules []forecast.Rule) bool {
	if len(names) != len(rules) {
		return false
	}
	for i := range names {
		if names[i] != rules[i].Name {
			return false
		}
	}
	return true
}

// LoadState restores the newest usable snapshot of snaps into a store
// configured by cfg: the newest one, else the one before it. A snapshot
// that cannot be read or used (damaged, or written with another bucket
// layout) is logged and passed over. Without a usable one it returns a nil
// store and a zero checkpoint, and the caller starts empty, rebuilding the
// state from what the points stream retains: a sidecar that starts is
// worth more than one that refuses to.
func LoadState(ctx context.Context, snaps Snapshots, cfg state.Config, log zerolog.Logger) (*state.Store, Checkpoint) {
	found := false
	for _, previous := range []bool{false, true} {
		which := "newest"
		if previous {
			which = "previous"
		}
		r, err := snaps.Load(ctx, previous)
		if errors.Is(err, ErrNoSnapshot) {
			continue
		}
		found = true
		if err != nil {
			log.Error().Err(err).Str("snapshot", which).Msg("snapshot unreadable")
			continue
		}
		store, cp, err := ReadSnapshot(r, cfg)
		r.Close()
		if err != nil {
			log.Error().Err(err).Str("snapshot", which).Msg("snapshot unusable")
			continue
		}
		if previous {
			log.Warn().Uint64("seq", cp.Seq).Msg("restored the previous snapshot; the newest was not usable")
		}
		return store, cp
	}
	if found {
		log.Error().Str("from", snaps.String()).Msg("no usable snapshot; rebuilding the state from the points stream")
	} else {
		log.Info().Str("from", snaps.String()).Msg("no snapshot yet; starting from the start of the points stream")
	}
	return nil, Checkpoint{}
}
