package backtest

import (
	"context"
	"fmt"
	"math"
	"runtime"
	"sync"
	"time"

	"github.com/headroom-dev/headroom/forecast"
	"github.com/headroom-dev/headroom/state"
	"github.com/headroom-dev/headroom/stream"
)

// Options set up an evaluation. Zero fields take the defaults shown.
type Options struct {
	Horizon time.Duration // forecast horizon; 24h
	Steps   int           // forecast steps per record; 24 (one an hour)
	Every   time.Duration // origin cadence of the forecast pass; 1h
	History time.Duration // history the engines and baselines see; 7 × 24h
	// WarmUp is how much data a series has before its first scored origin
	// when it does not set EvalFrom; 24h.
	WarmUp time.Duration
	// BreachEvery is the cadence of the second pass, which runs the rule of
	// invented series and scores alerts and reaction; 5m.
	BreachEvery time.Duration
	Engine      string // force an engine; empty chooses per series as serve does
	Workers     int    // series evaluated at once; runtime.GOMAXPROCS(0)
}

func (o *Options) defaults() {
	if o.Horizon <= 0 {
		o.Horizon = 24 * time.Hour
	}
	if o.Steps <= 0 {
		o.Steps = 24
	}
	if o.Every <= 0 {
		o.Every = time.Hour
	}
	if o.History <= 0 {
		o.History = 7 * 24 * time.Hour
	}
	if o.WarmUp <= 0 {
		o.WarmUp = 24 * time.Hour
	}
	if o.BreachEvery <= 0 {
		o.BreachEvery = 5 * time.Minute
	}
	if o.Workers <= 0 {
		o.Workers = runtime.GOMAXPROCS(0)
	}
}

// Result is the evaluation of one series: sums by forecast step, so that
// results pool into any grouping.
type Result struct {
	Name, Family string
	Step         time.Duration // forecast step (Horizon / Steps)
	Origins      int           // origins scored
	Refused      int           // points the processor refused (late or invalid)
	// Scale is the in-sample MAE of the one-step naive forecast over the
	// data before the first scored origin (Hyndman & Koehler 2006), the
	// denominator of MASE; 0 when the series is constant there.
	Scale float64
	// By forecast step k (0-based, step k+1): number of scored points, sum
	// of absolute errors per method, hits of the 80 % and 95 % bands, and
	// the sum of the 95 % interval scores.
	N       []int
	AbsErr  [nMethods][]float64
	In80    []int
	In95    []int
	Winkler []float64
	// Alerts and reaction, for invented series with a truth.
	Alerts *Alerts
}

// Alerts is what the rule pass of an invented series did.
type Alerts struct {
	HasRule    bool // the rule was run; the incident fields below are set
	ShouldOpen bool
	Opened     int // incidents opened
	Flaps      int // incidents reopened within two hours of resolving
	// Missed: the signal crossed while no incident was open.
	Missed bool
	// Lead is (crossing − opened) / horizon for the incident open at the
	// crossing, or the first opened after it (negative); NaN when none.
	Lead float64
	// Reaction is how long after the truth's change the +1h forecast came
	// within tolerance of the signal and stayed there an hour; -1 if it
	// never did, 0 without a change.
	HasChange bool
	Reaction  time.Duration
}

// Evaluate runs every series through the processor and the baselines, in
// parallel, and returns one result per series in the order given. The
// results do not depend on the number of workers.
func Evaluate(ctx context.Context, series []*Series, opt Options) ([]Result, error) {
	opt.defaults()
	out := make([]Result, len(series))
	errs := make([]error, len(series))
	next := make(chan int)
	var wg sync.WaitGroup
	for range min(opt.Workers, max(len(series), 1)) {
		wg.Go(func() {
			for i := range next {
				out[i], errs[i] = evaluateOne(series[i], &opt)
			}
		})
	}
	for i := range series {
		if ctx.Err() != nil {
			break
		}
		next <- i
	}
	close(next)
	wg.Wait()
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	for _, err := range errs {
		if err != nil {
			return nil, err
		}
	}
	return out, nil
}

// newProcessor returns a processor with its own one-partition store.
func newProcessor(c *capture, cfg stream.Config) (*stream.Processor, error) {
	store, err := state.New(state.Config{Partitions: 1, MaxSeries: 1, ChunkSize: 1, Lateness: time.Minute})
	if err != nil {
		return nil, err
	}
	var id [16]byte
	cfg.NewID = func() [16]byte { // deterministic ids; only the states are read
		for i := range id {
			if id[i]++; id[i] != 0 {
				break
			}
		}
		return id
	}
	cfg.Now = func() time.Time { return time.Unix(0, 0) }
	return stream.NewProcessor(store, c, cfg)
}

// feed adds the series' points in order and returns how many were refused.
func feed(p *stream.Processor, s *Series) int {
	w := p.NewWorker()
	for i := range s.T {
		_ = w.Add("series", nil, s.T[i], s.V[i]) // refusals are counted by the processor
	}
	return int(p.Stats().Rejected)
}

func evaluateOne(s *Series, opt *Options) (Result, error) {
	r := Result{Name: s.Name, Family: s.Family, Step: opt.Horizon / time.Duration(opt.Steps)}
	if len(s.T) != len(s.V) || len(s.T) < 2 {
		return r, fmt.Errorf("backtest: series %s: %d times and %d values", s.Name, len(s.T), len(s.V))
	}
	if s.Signal != nil && len(s.Signal) != len(s.T) {
		return r, fmt.Errorf("backtest: series %s: %d signal values for %d points", s.Name, len(s.Signal), len(s.T))
	}
	cp := &capture{}
	proc, err := newProcessor(cp, stream.Config{
		Horizon: opt.Horizon, Steps: opt.Steps, Every: opt.Every, History: opt.History,
		Engine: opt.Engine, EveryRecord: true,
	})
	if err != nil {
		return r, fmt.Errorf("backtest: series %s: %w", s.Name, err)
	}
	r.Refused = feed(proc, s)

	tl := newTimeline(s.T, s.V)
	from := s.EvalFrom
	if from == 0 {
		from = tl.t[0] + opt.WarmUp.Milliseconds()
	}
	r.Scale = naiveScale(&tl, from)
	r.score(&tl, cp.records, from, s.Step, opt)

	if s.Truth != nil && (s.Truth.HasRule || s.Truth.Change != 0) {
		a, err := alertPass(s, &tl, opt)
		if err != nil {
			return r, err
		}
		r.Alerts = a
	}
	return r, nil
}

// score adds up the errors of the records with origins at or after from.
func (r *Result) score(tl *timeline, recs []fcRecord, from int64, step time.Duration, opt *Options) {
	n := opt.Steps
	r.N, r.In80, r.In95, r.Winkler = make([]int, n), make([]int, n), make([]int, n), make([]float64, n)
	for m := range r.AbsErr {
		r.AbsErr[m] = make([]float64, n)
	}
	b := baseliner{tl: tl, history: opt.History.Milliseconds(), halfStep: max(step.Milliseconds()/2, 1)}
	var fc [nMethods][]float64
	var targets []int64
	tol := max(step.Milliseconds()/2, 1)
	for _, rec := range recs {
		if rec.origin < from || len(rec.points) == 0 {
			continue
		}
		targets = targets[:0]
		for _, p := range rec.points {
			targets = append(targets, p.t)
		}
		if !b.at(rec.origin, targets, &fc) {
			continue
		}
		scored := false
		for k, p := range rec.points {
			if k >= n {
				break
			}
			y, ok := tl.nearest(p.t, tol, 0, len(tl.t))
			if !ok {
				continue
			}
			scored = true
			r.N[k]++
			r.AbsErr[Engine][k] += math.Abs(p.mean - y)
			for m := Naive; m < nMethods; m++ {
				r.AbsErr[m][k] += math.Abs(fc[m][k] - y)
			}
			if p.lower80 <= y && y <= p.upper80 {
				r.In80[k]++
			}
			if p.lo95 <= y && y <= p.up95 {
				r.In95[k]++
			}
			r.Winkler[k] += winkler(p.lo95, p.up95, y, 0.05)
		}
		if scored {
			r.Origins++
		}
	}
}

// alertPass runs the series again with its rule at the finer cadence and
// scores incidents and reaction.
func alertPass(s *Series, tl *timeline, opt *Options) (*Alerts, error) {
	tr := s.Truth
	cp := &capture{ends: true}
	cfg := stream.Config{
		Horizon: opt.Horizon, Steps: opt.Steps, Every: opt.BreachEvery, History: opt.History,
		Engine: opt.Engine, EveryRecord: tr.Change != 0,
	}
	if tr.HasRule {
		cfg.Rules = []forecast.Rule{{Name: "truth", Threshold: tr.Threshold, Direction: tr.Direction, Horizon: opt.Horizon}}
	}
	proc, err := newProcessor(cp, cfg)
	if err != nil {
		return nil, fmt.Errorf("backtest: series %s: %w", s.Name, err)
	}
	feed(proc, s)
	a := &Alerts{ShouldOpen: tr.Incident, Lead: math.NaN()}
	if tr.HasRule {
		a.HasRule = true
		scoreIncidents(a, cp.events, tr.Crossing, opt.Horizon)
	}
	if tr.Change != 0 {
		a.HasChange = true
		sig := newTimeline(s.T, s.Signal)
		tol := max(3*tr.Noise, 0.1*math.Abs(tr.ChangeSize))
		a.Reaction = reaction(cp.records, &sig, tr.Change, tol, max(s.Step.Milliseconds()/2, 1), tr.SlopeChange)
	}
	return a, nil
}

// scoreIncidents reads the breach events of one rule on one series.
func scoreIncidents(a *Alerts, ev []breachEvent, crossing int64, horizon time.Duration) {
	const flapWindow = 2 * hourMs
	open := false
	var openedAt, resolvedAt int64
	lead := math.NaN()
	openAtCross := false
	for _, e := range ev {
		switch forecast.EventState(e.state) {
		case forecast.Opened:
			if crossing != 0 && e.at > crossing && !openAtCross && math.IsNaN(lead) {
				lead = -float64(e.at-crossing) / float64(horizon.Milliseconds())
			}
			if resolvedAt != 0 && e.at-resolvedAt <= flapWindow {
				a.Flaps++
			}
			a.Opened++
			open, openedAt = true, e.at
		case forecast.Resolved:
			if crossing != 0 && open && openedAt <= crossing && e.at > crossing && !openAtCross {
				openAtCross = true
				lead = float64(crossing-openedAt) / float64(horizon.Milliseconds())
			}
			open, resolvedAt = false, e.at
		}
	}
	if crossing != 0 && open && openedAt <= crossing && !openAtCross {
		openAtCross = true
		lead = float64(crossing-openedAt) / float64(horizon.Milliseconds())
	}
	a.Lead = lead
	a.Missed = crossing != 0 && !openAtCross
}

// reaction is the time from change until the first origin from which the
// forecast's first step (its last with atEnd) stays within tol of the
// signal for an hour; -1 if never.
func reaction(recs []fcRecord, sig *timeline, change int64, tol float64, halfStep int64, atEnd bool) time.Duration {
	ok := make([]bool, 0, len(recs))
	at := make([]int64, 0, len(recs))
	for _, rec := range recs {
		if rec.origin < change || len(rec.points) == 0 {
			continue
		}
		p := rec.points[0]
		if atEnd {
			p = rec.points[len(rec.points)-1]
		}
		y, found := sig.nearest(p.t, halfStep, 0, len(sig.t))
		at = append(at, rec.origin)
		ok = append(ok, found && math.Abs(p.mean-y) <= tol)
	}
	for i := range at {
		if !ok[i] {
			continue
		}
		j := i
		for j < len(at) && ok[j] && at[j]-at[i] < hourMs {
			j++
		}
		if j < len(at) && at[j]-at[i] >= hourMs && ok[j] {
			return time.Duration(at[i]-change) * time.Millisecond
		}
	}
	return -1
}
