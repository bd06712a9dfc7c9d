package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"
	"time"

	"github.com/headroom-dev/headroom/forecast/backtest"
)

// wantsScore reports whether replay's arguments ask for --score.
func wantsScore(args []string) bool {
	for _, a := range args {
		if a == "--" {
			return false
		}
		name := strings.TrimLeft(a, "-")
		if strings.HasPrefix(a, "-") && (name == "score" || strings.HasPrefix(name, "score=")) {
			return true
		}
	}
	return false
}

// runScore is "headroom replay --score": the rolling-origin evaluation of
// CSV files, or of the invented scenario suite, printed as a table.
func runScore(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := flag.NewFlagSet("replay --score", flag.ContinueOnError)
	fs.SetOutput(stderr)
	var (
		score       bool
		suite       int
		seed        uint64
		scenarios   string
		engine      string
		breachEvery time.Duration
	)
	fs.BoolVar(&score, "score", false, "score forecasts against baselines instead of writing records")
	fs.IntVar(&suite, "suite", 0, "run the invented scenario suite with this many variants per family (instead of PATH)")
	fs.Uint64Var(&seed, "seed", 1, "seed of the scenario suite")
	fs.StringVar(&scenarios, "scenarios", "", "scenario suite file (default: testdata/scenarios.json in this or a parent folder)")
	fs.StringVar(&engine, "engine", "", "force a forecast engine; empty chooses per series")
	fs.DurationVar(&breachEvery, "breach-every", 5*time.Minute, "cadence of the alert pass over invented series")
	fs.Usage = func() {
		fmt.Fprintln(fs.Output(), "Usage: headroom replay --score PATH | headroom replay --score --suite N [--seed S]\n\n"+
			"Score the engines by rolling origin (hourly origins, +1h…+24h, a week of history) against\n"+
			"naive, drift, least squares, Holt, seasonal naive and Theil–Sen baselines. PATH is a CSV file\n"+
			"(timestamp,value) or a folder searched recursively; --suite scores the invented scenarios,\n"+
			"including their alerts.\n\nFlags:")
		fs.PrintDefaults()
	}
	var paths []string
	for rest := args; ; {
		if err := fs.Parse(rest); err != nil {
			if errors.Is(err, flag.ErrHelp) {
				return err
			}
			return errUsage
		}
		if fs.NArg() == 0 {
			break
		}
		paths = append(paths, fs.Arg(0))
		rest = fs.Args()[1:]
	}
	switch {
	case suite > 0 && len(paths) > 0:
		fmt.Fprintln(stderr, "replay --score takes a PATH or --suite, not both")
		return errUsage
	case suite < 0 || suite > backtest.MaxVariants:
		fmt.Fprintf(stderr, "--suite must be between 1 and %d\n", backtest.MaxVariants)
		return errUsage
	case suite == 0 && len(paths) != 1:
		fmt.Fprintln(stderr, "replay --score needs one PATH (a CSV file or a folder), or --suite N")
		return errUsage
	}
	opt := backtest.Options{Engine: engine, BreachEvery: breachEvery}
	var (
		series []*backtest.Series
		title  string
		by     = backtest.BySeries
	)
	if suite > 0 {
		if scenarios == "" {
			p, err := findScenarios()
			if err != nil {
				return err
			}
			scenarios = p
		}
		s, err := backtest.LoadSuite(scenarios)
		if err != nil {
			return err
		}
		series = s.Generate(seed, suite)
		title = fmt.Sprintf("scenario suite: %d variants per family, seed %d", suite, seed)
		by = backtest.ByFamily
	} else {
		st, err := os.Stat(paths[0])
		if err != nil {
			return err
		}
		if st.IsDir() {
			series, err = backtest.LoadDir(paths[0])
		} else {
			var s *backtest.Series
			s, err = backtest.LoadFile(paths[0])
			series = []*backtest.Series{s}
		}
		if err != nil {
			return err
		}
		if len(series) == 0 {
			return fmt.Errorf("no CSV files under %s", paths[0])
		}
		title = fmt.Sprintf("%s: %d series", paths[0], len(series))
	}
	start := time.Now()
	res, err := backtest.Evaluate(ctx, series, opt)
	if err != nil {
		return err
	}
	if err := backtest.NewReport(title, res, by).WriteText(stdout); err != nil {
		return err
	}
	fmt.Fprintf(stderr, "scored %d series in %v\n", len(series), time.Since(start).Round(time.Millisecond))
	return nil
}

// findScenarios looks for testdata/scenarios.json in the working folder
// and its parents.
func findScenarios() (string, error) {
	dir, err := os.Getwd()
	if err != nil {
		return "", err
	}
	for {
		p := filepath.Join(dir, "testdata", "scenarios.json")
		if _, err := os.Stat(p); err == nil {
			return p, nil
		}
		up := filepath.Dir(dir)
		if up == dir {
			return "", errors.New("testdata/scenarios.json not found here or above; pass --scenarios FILE")
		}
		dir = up
	}
}
