package main

import (
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"time"

	"github.com/rs/zerolog"

	"github.com/headroom-dev/headroom/forecast"
	"github.com/headroom-dev/headroom/state"
	"github.com/headroom-dev/headroom/stream"
)

// ruleFlags gives one rule on the command line, or a rules file.
type ruleFlags struct {
	file      string
	threshold float64
	direction string
	horizon   time.Duration
	match     string
	confirm   time.Duration
	release   time.Duration
	warmup    time.Duration
	openAt    float64
	closeAt   float64
	engine    string
	name      string
	set       map[string]bool
}

func (r *ruleFlags) register(fs *flag.FlagSet) {
	fs.StringVar(&r.file, "rules", "", "rules file (JSON, see README); instead of or besides the single-rule flags")
	fs.Float64Var(&r.threshold, "threshold", 0, "threshold of the command-line rule")
	fs.StringVar(&r.direction, "direction", "above", "side of the threshold that is a breach: above or below")
	fs.DurationVar(&r.horizon, "horizon", 24*time.Hour, "how far ahead a projected breach counts, and the forecast horizon")
	fs.StringVar(&r.match, "match", "", "series selector of the command-line rule, e.g. 'disk_used_ratio,mount=/data*' (empty: all series)")
	fs.DurationVar(&r.confirm, "confirm", 10*time.Minute, "how long a projection must hold before an incident opens (data time)")
	fs.DurationVar(&r.release, "release", 10*time.Minute, "how long a projection must fail before an incident resolves (data time)")
	fs.DurationVar(&r.warmup, "warmup", forecast.DefaultWarmup, "history a series needs before an incident opens on it (0: none)")
	fs.Float64Var(&r.openAt, "open-at", 0.8, "breach probability at which a projection holds")
	fs.Float64Var(&r.closeAt, "close-at", 0.5, "breach probability below which an open incident starts to resolve")
	fs.StringVar(&r.engine, "engine", "", "force a forecast engine (incline or tide); empty chooses per series")
	fs.StringVar(&r.name, "rule-name", "cli", "name of the command-line rule")
}

// rules returns the rules from the file and from the flags. The flag rule
// exists when --threshold was given.
func (r *ruleFlags) rules() ([]forecast.Rule, error) {
	var out []forecast.Rule
	if r.file != "" {
		f, err := os.Open(r.file)
		if err != nil {
			return nil, fmt.Errorf("rules file: %w", err)
		}
		defer f.Close()
		rs, err := forecast.ParseRules(f)
		if err != nil {
			return nil, fmt.Errorf("rules file %s: %w", r.file, err)
		}
		out = append(out, rs...)
	}
	if r.set["threshold"] {
		dir, err := forecast.ParseDirection(r.direction)
		if err != nil {
			return nil, err
		}
		m, err := forecast.ParseMatch(r.match)
		if err != nil {
			return nil, fmt.Errorf("--match: %w", err)
		}
		if r.horizon <= 0 {
			return nil, errors.New("--horizon must be positive")
		}
		warmup := r.warmup
		switch {
		case warmup < 0:
			return nil, errors.New("--warmup must not be negative")
		case warmup == 0:
			warmup = -1 // none
		}
		out = append(out, forecast.Rule{
			Name: r.name, Match: m, Threshold: r.threshold, Direction: dir, Horizon: r.horizon,
			OpenAt: r.openAt, CloseAt: r.closeAt, Confirm: r.confirm, Release: r.release, Warmup: warmup, Engine: r.engine,
		})
	} else if r.set["direction"] || r.set["match"] {
		return nil, errors.New("--direction and --match need --threshold")
	}
	return out, nil
}

// engineFlags tune the store and the processor.
type engineFlags struct {
	partitions  int
	maxSeries   int
	idleExpiry  time.Duration
	lateness    time.Duration
	every       time.Duration
	history     time.Duration
	steps       int
	prefix      string
	format      string
	maxFuture   time.Duration
	subscribers int
	logLevel    string
}

func (e *engineFlags) register(fs *flag.FlagSet, bus bool) {
	fs.IntVar(&e.partitions, "partitions", 64, "state partitions (series map to them by a stable hash)")
	fs.IntVar(&e.maxSeries, "max-series", 1_000_000, "most series kept; new series beyond it are rejected")
	fs.DurationVar(&e.idleExpiry, "idle-expiry", 14*24*time.Hour, "forget a series that has sent nothing for this long, in the data's own time (0: never)")
	fs.DurationVar(&e.lateness, "lateness", time.Minute, "how far behind a series' newest point a point is still merged")
	fs.DurationVar(&e.every, "every", time.Minute, "evaluate forecasts and rules once per this much data time")
	fs.DurationVar(&e.history, "history", 0, "most history the engines look at (0: all the state keeps, two weeks)")
	fs.IntVar(&e.steps, "steps", 12, "points per forecast record")
	fs.StringVar(&e.logLevel, "log-level", "info", "log level: debug, info, warn, error")
	if bus {
		fs.StringVar(&e.prefix, "prefix", stream.DefaultPrefix, "subject prefix")
		fs.StringVar(&e.format, "format", "json", "encoding of published records: json or msgpack")
		fs.DurationVar(&e.maxFuture, "max-future", 24*time.Hour, "reject points stamped further ahead of the wall clock")
		fs.IntVar(&e.subscribers, "subscribers", 1, "ingest subscribers; more than one shares the subject as a queue group")
	}
}

func (e *engineFlags) storeConfig() state.Config {
	return state.Config{Partitions: e.partitions, MaxSeries: e.maxSeries, Lateness: e.lateness, IdleExpiry: e.idleExpiry}
}

func (e *engineFlags) store() (*state.Store, error) {
	return state.New(e.storeConfig())
}

// durableFlags set up durable mode.
type durableFlags struct {
	on          bool
	name        string
	snapDir     string
	snapBucket  string
	every       time.Duration
	retain      time.Duration
	retainBytes int64
	eventBytes  int64
}

func (d *durableFlags) register(fs *flag.FlagSet) {
	fs.BoolVar(&d.on, "durable", false, "ingest from a JetStream stream and keep state in snapshots, so that a restart loses nothing (see README, Operations)")
	fs.StringVar(&d.name, "name", "headroom", "name of this sidecar's durable consumer and snapshot")
	fs.StringVar(&d.snapDir, "snapshot-dir", "", "directory of snapshots; default <data>/snapshots with the embedded server, else the JetStream object store (--snapshot-bucket)")
	fs.StringVar(&d.snapBucket, "snapshot-bucket", "headroom-snapshots", "JetStream object store of snapshots when --snapshot-dir is not given and --nats is")
	fs.DurationVar(&d.every, "snapshot-every", time.Minute, "how often to snapshot the state in durable mode")
	fs.DurationVar(&d.retain, "retain", 24*time.Hour, "how long the points and events streams keep messages, when headroom creates them")
	fs.Int64Var(&d.retainBytes, "retain-bytes", 4<<30, "most bytes the points stream keeps, when headroom creates it")
	fs.Int64Var(&d.eventBytes, "events-bytes", 1<<30, "most bytes the events stream keeps, when headroom creates it")
}

func (e *engineFlags) config(rules []forecast.Rule, horizon time.Duration, engine string) stream.Config {
	return stream.Config{
		Rules:   rules,
		Horizon: horizon,
		Steps:   e.steps,
		Every:   e.every,
		History: e.history,
		Engine:  engine,
		Limits:  stream.Limits{MaxFuture: e.maxFuture},
	}
}

func (e *engineFlags) logger(w io.Writer) (zerolog.Logger, error) {
	lvl, err := zerolog.ParseLevel(e.logLevel)
	if err != nil {
		return zerolog.Nop(), fmt.Errorf("--log-level: %w", err)
	}
	return zerolog.New(w).Level(lvl).With().Timestamp().Logger(), nil
}

// parse parses args and remembers which flags were set.
func parse(fs *flag.FlagSet, args []string, set map[string]bool) error {
	if err := fs.Parse(args); err != nil {
		if errors.Is(err, flag.ErrHelp) {
			return err
		}
		return errUsage
	}
	if fs.NArg() > 0 {
		fmt.Fprintf(fs.Output(), "unexpected arguments: %v\n", fs.Args())
		return errUsage
	}
	fs.Visit(func(f *flag.Flag) { set[f.Name] = true })
	return nil
}
