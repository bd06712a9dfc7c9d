package main

import (
	"bufio"
	"context"
	"encoding/json"
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"time"

	"github.com/headroom-dev/headroom/forecast"
	"github.com/headroom-dev/headroom/forecast/backtest"
	"github.com/headroom-dev/headroom/stream"
)

func runReplay(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	if wantsScore(args) {
		return runScore(ctx, args, stdout, stderr)
	}
	fs := flag.NewFlagSet("replay", flag.ContinueOnError)
	fs.SetOutput(stderr)
	var (
		in, out, metric string
		plotFile        string
		plotEvery       time.Duration
		rf              ruleFlags
		eng             engineFlags
		set             = map[string]bool{}
	)
	fs.StringVar(&in, "in", "", "CSV file with header timestamp,value (timestamps: 'YYYY-MM-DD HH:MM:SS' UTC, RFC3339 or unix seconds)")
	fs.StringVar(&out, "out", "-", "JSON Lines output file; - for standard output")
	fs.StringVar(&metric, "metric", "", "metric name of the series (default: the file name without extension)")
	fs.StringVar(&plotFile, "plot", "", "also draw the replay as an SVG chart in this file: the data, forecasts, thresholds and breach events")
	fs.DurationVar(&plotEvery, "plot-every", 6*time.Hour, "with --plot, draw the forecast of the first origin in every such span of the data's clock, besides those of breach events and the last; left unset, it is thinned on long files")
	rf.register(fs)
	eng.register(fs, false)
	fs.Usage = func() {
		fmt.Fprintln(fs.Output(), "Usage: headroom replay --in FILE --out FILE --horizon DUR --every DUR [--threshold X --direction above|below] [--history DUR] [--plot FILE.svg]\n\n"+
			"Run the same engines as serve over a CSV file and write the records serve would publish:\n"+
			"one forecast record per --every of the data's own clock, and every breach event.\n"+
			"headroom replay --score PATH (or --score --suite N) scores the engines instead: see replay --score --help.\n\nFlags:")
		fs.PrintDefaults()
	}
	rf.set = set
	if err := parse(fs, args, set); err != nil {
		return err
	}
	if in == "" {
		fmt.Fprintln(stderr, "replay needs --in")
		return errUsage
	}
	if metric == "" {
		metric = strings.TrimSuffix(filepath.Base(in), filepath.Ext(in))
	}
	rules, err := rf.rules()
	if err != nil {
		return err
	}
	switch {
	case set["plot-every"] && plotFile == "":
		return errors.New("--plot-every needs --plot")
	case plotEvery <= 0:
		return errors.New("--plot-every must be positive")
	}
	f, err := os.Open(in)
	if err != nil {
		return err
	}
	defer f.Close()
	var w io.Writer = stdout
	if out != "-" {
		of, err := os.Create(out)
		if err != nil {
			return err
		}
		defer of.Close()
		w = of
	}
	bw := bufio.NewWriterSize(w, 1<<16)
	sink := &lineSink{enc: json.NewEncoder(bw)}
	var (
		emit    stream.Emitter = sink
		observe func(ts int64, v float64)
		pc      *plotCollector
	)
	if plotFile != "" {
		pc = newPlotCollector(filepath.Base(in), metric, rules, plotEvery, !set["plot-every"])
		emit, observe = teeEmitter{sink, pc}, pc.Observe
	}
	st, err := replay(ctx, f, metric, &eng, rules, rf.horizon, rf.engine, emit, observe)
	if ferr := bw.Flush(); err == nil {
		err = ferr
	}
	if err != nil {
		return err
	}
	fmt.Fprintf(stderr, "replayed %d points (%d refused): %d forecast records, %d breach events\n", st.Points, st.Rejected, st.Forecasts, st.Breaches)
	if sink.err != nil {
		return sink.err
	}
	if pc != nil {
		if err := writePlot(plotFile, pc); err != nil {
			return err
		}
	}
	return nil
}

// writePlot renders the collected replay to an SVG file.
func writePlot(name string, pc *plotCollector) error {
	f, err := os.Create(name)
	if err != nil {
		return fmt.Errorf("plot: %w", err)
	}
	err = pc.chart().writeSVG(f)
	if cerr := f.Close(); err == nil {
		err = cerr
	}
	if err != nil {
		return fmt.Errorf("plot %s: %w", name, err)
	}
	return nil
}

// replay feeds the CSV rows of one series to a Processor in file order.
// Refused rows (late, non-finite) are counted and skipped, as serve does;
// observe, when not nil, sees every accepted row.
func replay(ctx context.Context, r io.Reader, metric string, eng *engineFlags, rules []forecast.Rule, horizon time.Duration, engine string, sink stream.Emitter, observe func(ts int64, v float64)) (stream.Stats, error) {
	store, err := eng.store()
	if err != nil {
		return stream.Stats{}, err
	}
	cfg := eng.config(rules, horizon, engine)
	cfg.EveryRecord = true
	proc, err := stream.NewProcessor(store, sink, cfg)
	if err != nil {
		return stream.Stats{}, err
	}
	w := proc.NewWorker()
	err = backtest.ReadRows(r, func(line int, ts int64, v float64) error {
		if line%4096 == 0 && ctx.Err() != nil {
			return ctx.Err()
		}
		if err := w.Add(metric, nil, ts, v); err == nil && observe != nil {
			observe(ts, v)
		}
		return nil
	})
	return proc.Stats(), err
}

// lineSink writes records as JSON Lines.
type lineSink struct {
	mu  sync.Mutex
	enc *json.Encoder
	err error
}

func (s *lineSink) write(v any) {
	s.mu.Lock()
	if err := s.enc.Encode(v); err != nil && s.err == nil {
		s.err = err
	}
	s.mu.Unlock()
}

func (s *lineSink) Forecast(r *stream.ForecastRecord) { s.write(r) }
func (s *lineSink) Breach(r *stream.BreachRecord)     { s.write(r) }
func (s *lineSink) Reject(r *stream.RejectRecord)     { s.write(r) }
