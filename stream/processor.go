package stream

import (
	"errors"
	"fmt"
	"math"
	"sync/atomic"
	"time"

	"github.com/google/uuid"

	"github.com/headroom-dev/headroom/forecast"
	"github.com/headroom-dev/headroom/state"
)

// Emitter receives the records a Processor produces. Methods are called
// from ingest goroutines, some under a partition lock, so they must be safe
// for concurrent use and must not block for long. The record is only valid
// during the call.
type Emitter interface {
	Forecast(r *ForecastRecord)
	Breach(r *BreachRecord)
	Reject(r *RejectRecord)
}

// Config tunes a Processor. Zero fields take the defaults shown.
type Config struct {
	Rules   []forecast.Rule // at most 64; defaults filled in by NewProcessor
	Horizon time.Duration   // horizon of forecast records; default the longest rule horizon, else 24h
	Steps   int             // points per forecast record; default 12
	Every   time.Duration   // evaluation cadence in the data's own time; default the finest bucket width
	History time.Duration   // most history the engines look at; 0 means all the store keeps
	Engine  string          // engine for forecast records; empty chooses per series
	// EveryRecord emits a forecast record at every evaluation, even when it
	// carries no news; replay uses it so that its output has one record per
	// cadence step.
	EveryRecord bool
	Limits      Limits // input limits for the decoder
	// Now is the wall clock, used only to judge absurd timestamps and to
	// stamp reject records; default time.Now.
	Now func() time.Time
	// NewID, when set, makes incident and event ids in call order. By
	// default ids are name-based UUIDs of what they name (see ids.go), so
	// that replaying the same points gives the same ids.
	NewID func() [16]byte
	// Calibration tunes the online calibration of the bands; the zero
	// value takes its defaults.
	Calibration forecast.Calibration
}

// Stats counts what a Processor has done since it started.
type Stats struct {
	Messages  uint64 // messages handled
	Points    uint64 // points applied to the store
	Rejected  uint64 // points or messages refused
	Forecasts uint64 // forecast records emitted
	Breaches  uint64 // breach events emitted
}

// Processor applies decoded points to a store and turns closed buckets into
// forecast records and breach events. It holds no transport: Ingest feeds
// it from NATS and the replay command from a file. Use one Worker per
// goroutine.
type Processor struct {
	store   *state.Store
	emit    Emitter
	cfg     Config
	every   int64 // ms
	horizon time.Duration
	warmCap time.Duration // longest warm-up the history allows

	messages, points, rejected, forecasts, breaches atomic.Uint64
}

// NewProcessor checks cfg and returns a Processor writing to emit.
func NewProcessor(store *state.Store, emit Emitter, cfg Config) (*Processor, error) {
	if store == nil || emit == nil {
		return nil, errors.New("stream: processor needs a store and an emitter")
	}
	if len(cfg.Rules) > 64 {
		return nil, fmt.Errorf("stream: %d rules, at most 64 are supported", len(cfg.Rules))
	}
	rules := make([]forecast.Rule, len(cfg.Rules))
	copy(rules, cfg.Rules)
	cfg.Rules = rules
	for i := range cfg.Rules {
		cfg.Rules[i].Defaults()
		if e := cfg.Rules[i].Engine; e != "" {
			if _, ok := forecast.Lookup(e); !ok {
				return nil, fmt.Errorf("stream: rule %q names unknown engine %q", cfg.Rules[i].Name, e)
			}
		}
	}
	if cfg.Engine != "" {
		if _, ok := forecast.Lookup(cfg.Engine); !ok {
			return nil, fmt.Errorf("stream: unknown engine %q", cfg.Engine)
		}
	}
	if cfg.Horizon <= 0 {
		cfg.Horizon = 24 * time.Hour
		if len(cfg.Rules) > 0 {
			cfg.Horizon = 0
			for _, r := range cfg.Rules {
				cfg.Horizon = max(cfg.Horizon, r.Horizon)
			}
		}
	}
	if cfg.Steps <= 0 {
		cfg.Steps = 12
	}
	if cfg.Every <= 0 {
		cfg.Every = store.Layout()[0].Width
	}
	if cfg.Now == nil {
		cfg.Now = time.Now
	}
	// A warm-up longer than the history the engines see could never end.
	warmCap := time.Duration(0)
	for _, l := range store.Layout() {
		warmCap = max(warmCap, l.Width*time.Duration(l.Count))
	}
	if cfg.History > 0 {
		warmCap = min(warmCap, cfg.History)
	}
	// The view of a series spans a little less than the store keeps.
	warmCap = warmCap * 9 / 10
	return &Processor{store: store, emit: emit, cfg: cfg, every: cfg.Every.Milliseconds(), horizon: cfg.Horizon, warmCap: warmCap}, nil
}

// Stats returns the counters.
func (p *Processor) Stats() Stats {
	return Stats{
		Messages:  p.messages.Load(),
		Points:    p.points.Load(),
		Rejected:  p.rejected.Load(),
		Forecasts: p.forecasts.Load(),
		Breaches:  p.breaches.Load(),
	}
}

// Rules returns the rules in force, defaults filled in.
func (p *Processor) Rules() []forecast.Rule { return p.cfg.Rules }

// Store returns the store the processor feeds.
func (p *Processor) Store() *state.Store { return p.store }

// Worker is one goroutine's handle on a Processor: it owns a decoder and
// forecast scratch so that the hot path allocates nothing.
type Worker struct {
	p       *Processor
	dec     *Decoder
	sc      *forecast.Scratch
	view    state.View
	fc      forecast.Forecast
	alt     forecast.Forecast
	pts     []forecast.Point
	onClose func(*state.Series)
	onPoint func(*Point)
	onBad   func(Reject)
	newID   func() [16]byte // incident ids for forecast.Advance

	// the incident being advanced, which newID names
	idSeries, idRule string
	idAt             int64
	idBuf            []byte

	// per message
	subject string
	msg     []byte
	applied uint64
	refused uint64
	keyBuf  []byte
	labels  []state.Label
	entries []state.Entry // the message's decoded points, applied in one batch
	texts   []byte        // arena holding the entries' key texts
}

// NewWorker returns a Worker for one goroutine.
func (p *Processor) NewWorker() *Worker {
	w := &Worker{p: p, dec: NewDecoder(p.cfg.Limits, p.cfg.Now), sc: forecast.NewScratch()}
	w.onClose = w.evaluate
	w.onPoint = w.collect
	w.onBad = w.reject
	w.newID = p.cfg.NewID
	if w.newID == nil {
		w.newID = w.incidentID
	}
	return w
}

// Handle decodes one message received on subject and applies its points.
// It returns how many points were applied.
//
// The points of a message go to the store in one batch, which overlaps
// their memory accesses; points the store refuses are reported after the
// batch, in message order.
func (w *Worker) Handle(subject string, msg []byte) int {
	w.subject, w.msg = subject, msg
	w.applied, w.refused = 0, 0
	w.entries, w.texts = w.entries[:0], w.texts[:0]
	w.dec.Decode(msg, w.onPoint, w.onBad)
	w.applied = uint64(w.p.store.AddBatch(w.entries, w.onClose))
	for i := range w.entries {
		if e := &w.entries[i]; e.Err != nil {
			w.refuse(e.Key.Text, e.Err)
		}
	}
	clear(w.entries) // drop the errors; the texts stay in the arena
	w.p.messages.Add(1)
	w.p.points.Add(w.applied)
	if w.refused > 0 {
		w.p.rejected.Add(w.refused)
	}
	w.msg = nil
	return int(w.applied)
}

// Add applies one point given by its parts; the replay command uses it.
// Labels are sorted in place.
func (w *Worker) Add(metric string, labels []state.Label, ts int64, v float64) error {
	w.keyBuf = append(w.keyBuf[:0], metric...)
	k := state.MakeKey(w.keyBuf[len(metric):], w.keyBuf[:len(metric)], labels)
	err := w.p.store.Add(k, ts, v, w.onClose)
	if err != nil {
		w.p.rejected.Add(1)
		return err
	}
	w.p.points.Add(1)
	return nil
}

// collect queues a decoded point for the message's batch. The decoder reuses
// the key text's memory for the next point, so the text is copied into
// the worker's arena; an arena that grows leaves earlier entries pointing
// into the old array, which stays as it was.
func (w *Worker) collect(pt *Point) {
	n := len(w.texts)
	w.texts = append(w.texts, pt.Key.Text...)
	k := pt.Key
	k.Text = w.texts[n:len(w.texts):len(w.texts)]
	w.entries = append(w.entries, state.Entry{Key: k, TS: pt.TS, Value: pt.Value})
}

// refuse reports a point of series text that the store refused with err.
func (w *Worker) refuse(text []byte, err error) {
	w.refused++
	rec := RejectRecord{Kind: "rejected", Subject: w.subject, Index: -1, Series: string(text), Detail: err.Error()}
	switch {
	case errors.Is(err, state.ErrLate):
		rec.Reason = "late"
	case errors.Is(err, state.ErrSeriesCap):
		rec.Reason = "series_limit"
	case errors.Is(err, state.ErrValue):
		rec.Reason = ReasonNonFinite
	case errors.Is(err, state.ErrTime):
		rec.Reason = ReasonTSOutOfRange
	default:
		rec.Reason = "refused"
	}
	w.p.emitReject(&rec, w.msg)
}

func (w *Worker) reject(r Reject) {
	w.refused++
	rec := RejectRecord{Kind: "rejected", Subject: w.subject, Index: r.Index, Reason: r.Reason, Detail: r.Detail}
	w.p.emitReject(&rec, w.msg)
}

func (p *Processor) emitReject(rec *RejectRecord, msg []byte) {
	rec.At = p.cfg.Now().UTC().Format(time.RFC3339)
	rec.setPayload(msg)
	p.emit.Reject(rec)
}

// evaluate runs under the series' partition lock when buckets have closed.
func (w *Worker) evaluate(se *state.Series) {
	p := w.p
	closed := se.Closed()
	memo := se.Memo()
	if memo.Evaluated != 0 && closed/p.every <= memo.Evaluated/p.every {
		return
	}
	memo.Evaluated = closed
	if !memo.RulesSet {
		memo.Rules = p.matchRules(se.Key())
		memo.RulesSet = true
	}
	se.View(&w.view, p.cfg.History)
	if w.view.Len() < minSupport {
		// A handful of buckets gives forecasts too wild to be worth a record.
		return
	}
	cyc := forecast.Cycles{
		At:      memo.Cycle.At,
		Period:  time.Duration(memo.Cycle.Period) * time.Second,
		Period2: time.Duration(memo.Cycle.Period2) * time.Second,
		ACF:     float64(memo.Cycle.ACF),
	}
	eng := forecast.Choose(&w.view, w.sc, &cyc, p.cfg.Engine)
	memo.Cycle = state.CycleMemo{
		At:      cyc.At,
		Period:  int32(min(cyc.Period/time.Second, math.MaxInt32)),
		Period2: int32(min(cyc.Period2/time.Second, math.MaxInt32)),
		ACF:     float32(cyc.ACF),
	}
	if !eng.Fit(&w.view, w.sc, &w.fc) {
		return
	}
	p.cfg.Calibration.Apply(&memo.Calib, &w.view, &w.fc)
	w.publishForecast(se, memo)
	if memo.Rules == 0 {
		return
	}
	for i := range p.cfg.Rules {
		if memo.Rules&(1<<uint(i)) == 0 {
			continue
		}
		r := &p.cfg.Rules[i]
		fc := &w.fc
		if r.Engine != "" && r.Engine != w.fc.Engine {
			e, _ := forecast.Lookup(r.Engine)
			if !e.Fit(&w.view, w.sc, &w.alt) {
				continue
			}
			// The series' calibration speaks of its errors, whichever
			// engine forecasts them.
			p.cfg.Calibration.Use(&memo.Calib, &w.alt)
			fc = &w.alt
		}
		proj := forecast.Project(fc, r)
		if r.Warmup > 0 && w.view.Span() < min(r.Warmup, p.warmCap).Seconds() {
			// Too little history to tell a trend from half a cycle:
			// nothing opens yet.
			proj.Probability = 0
		}
		inc := se.Incident(uint16(i), proj.Probability >= r.OpenAt)
		if inc == nil {
			continue
		}
		w.idSeries, w.idRule, w.idAt = se.Key(), r.Name, closed
		st, emit := forecast.Advance(inc, r, proj, closed, w.newID)
		if emit {
			w.publishBreach(se, r, fc, proj, st, inc)
		}
		if inc.Phase == state.Quiet && !forecast.Recent(inc, closed) {
			se.DropIncident(uint16(i))
		}
	}
}

// incidentID names the incident being advanced.
func (w *Worker) incidentID() [16]byte {
	var id [16]byte
	id, w.idBuf = incidentID(w.idBuf, w.idSeries, w.idRule, w.idAt)
	return id
}

func (p *Processor) matchRules(key string) uint64 {
	metric, labels, err := state.ParseKey(key)
	if err != nil {
		return 0
	}
	var mask uint64
	for i := range p.cfg.Rules {
		if p.cfg.Rules[i].Match.Match(metric, labels) {
			mask |= 1 << uint(i)
		}
	}
	return mask
}

// publishForecast emits a forecast record unless the forecast at the horizon
// moved by less than half a percent of its 95 % band since the last one.
func (w *Worker) publishForecast(se *state.Series, memo *state.Memo) {
	p := w.p
	w.pts = w.fc.Points(p.horizon, p.cfg.Steps, w.pts[:0])
	if len(w.pts) == 0 {
		return
	}
	last := w.pts[len(w.pts)-1]
	prev := memo.Published
	if prev.At != 0 && !p.cfg.EveryRecord {
		tol := 0.005 * (last.Upper95 - last.Lower95)
		if math.Abs(last.Mean-float64(prev.Mean)) <= tol &&
			math.Abs(last.Upper95-float64(prev.Upper)) <= tol &&
			math.Abs(last.Lower95-float64(prev.Lower)) <= tol {
			return
		}
	}
	memo.Published = state.Published{At: w.fc.Origin, Mean: float32(last.Mean), Upper: float32(last.Upper95), Lower: float32(last.Lower95)}
	fc := &w.fc
	rec := ForecastRecord{
		Kind:         "forecast",
		Series:       se.Key(),
		Token:        Token(state.Key{Hash: se.Hash(), Text: []byte(se.Key())}),
		At:           formatMs(fc.Origin),
		Engine:       fc.Engine,
		Horizon:      formatDuration(p.horizon),
		Level:        fc.Level,
		TrendPerHour: fc.Slope * 3600,
		Since:        formatMs(fc.Since),
		CycleSeconds: fc.Cycle.Seconds(),
		Cycle2:       fc.Cycle2.Seconds(),
		ACF:          round4(fc.Autocorrelation),
		Support:      fc.Support,
		Sigma:        fc.Sigma,
		Points:       make([]ForecastPoint, len(w.pts)),
	}
	for i, pt := range w.pts {
		rec.Points[i] = ForecastPoint{T: formatMs(pt.T), Mean: pt.Mean, Lower80: pt.Lower80, Upper80: pt.Upper80, Lower95: pt.Lower95, Upper95: pt.Upper95}
	}
	p.forecasts.Add(1)
	p.emit.Forecast(&rec)
}

func (w *Worker) publishBreach(se *state.Series, r *forecast.Rule, fc *forecast.Forecast, proj forecast.Projection, st forecast.EventState, inc *state.Incident) {
	p := w.p
	var id [16]byte
	if p.cfg.NewID != nil {
		id = p.cfg.NewID()
	} else {
		id, w.idBuf = eventID(w.idBuf, inc.ID, string(st), fc.Origin)
	}
	rec := BreachRecord{
		Kind:        "breach",
		Series:      se.Key(),
		Token:       Token(state.Key{Hash: se.Hash(), Text: []byte(se.Key())}),
		Rule:        r.Name,
		State:       string(st),
		At:          formatMs(fc.Origin),
		Incident:    uuid.UUID(inc.ID).String(),
		ID:          uuid.UUID(id).String(),
		Threshold:   r.Threshold,
		Direction:   r.Direction.String(),
		Horizon:     formatDuration(r.Horizon),
		Probability: round4(proj.Probability),
		ETA:         formatMs(proj.ETA),
		ETAEarly:    formatMs(proj.Early),
		ETALate:     formatMs(proj.Late),
		Engine:      fc.Engine,
		Level:       fc.Level,
	}
	p.breaches.Add(1)
	p.emit.Breach(&rec)
}

// minSupport is the fewest non-empty buckets a series needs before it is
// forecast: ten minutes of data at the finest resolution.
const minSupport = 10

func round4(x float64) float64 { return math.Round(x*1e4) / 1e4 }
