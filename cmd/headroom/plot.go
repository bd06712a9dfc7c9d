package main

import (
	"math"
	"slices"
	"sync"
	"time"

	"github.com/headroom-dev/headroom/forecast"
	"github.com/headroom-dev/headroom/stream"
)

// This file draws "headroom replay --plot": an SVG chart of what the rules
// would have done over a CSV file. A plotCollector gathers, while the
// replay runs, the observed series (decimated), the forecast records of
// the origins to draw, the breach events and the points where the data
// crossed a threshold; chart then lays them out and writeSVG draws them.

// Chart geometry in SVG user units.
const (
	svgWidth   = 1200
	svgHeight  = 620
	areaLeft   = 78.0
	areaRight  = 1040.0 // threshold labels go to the right of it
	areaTop    = 92.0
	areaBottom = 566.0
)

const (
	// obsBuckets bounds the memory of the observed series: points fold into
	// at most this many time buckets, each keeping its minimum and maximum.
	obsBuckets = 4096
	// maxAutoFans is how many regular origins are drawn at most when
	// --plot-every is not given: denser fans than this overlap into a smear
	// on a long file, so the default thins them by powers of two.
	maxAutoFans = 40
	// maxCrossings bounds the crossings kept per rule: a noisy series that
	// hovers at a threshold can cross it at every other point. Past it,
	// every other crossing kept is dropped and only every other one after
	// is kept, so the ones kept stay spread over the whole file.
	maxCrossings = 4096
	// crossingGap is the least distance between crossing markers drawn.
	crossingGap = 6.0
	// thresholdReach is how many data ranges beyond the data a threshold
	// may lie and still widen the value axis; one further away is drawn at
	// the edge as off scale, so that it does not flatten the series.
	thresholdReach = 10
	// maxMagnitude bounds every value that enters the layout, so that sums
	// and differences of extreme inputs stay finite.
	maxMagnitude = 1e306
)

// plotPoint is one observed point.
type plotPoint struct {
	t int64 // unix ms
	v float64
}

// fanPoint is one step of a drawn forecast.
type fanPoint struct {
	t                            int64
	mean, lo80, hi80, lo95, hi95 float64
}

// plotFan is a forecast record kept for drawing.
type plotFan struct {
	origin  int64
	slot    int64 // origin / --plot-every
	regular bool  // the first record of its --plot-every slot
	breach  bool  // a breach event was published at its origin
	opened  bool  // an incident opened at its origin
	engine  string
	points  []fanPoint
}

// plotMark notes a breach event at an origin.
type plotMark struct {
	at     int64
	opened bool
}

// plotEvent is a breach event.
type plotEvent struct {
	at, eta   int64
	state     string
	rule      string
	incident  string
	threshold float64
	prob      float64
}

// plotRule is a rule that applies to the replayed series, with the
// crossings of its threshold seen in the data.
type plotRule struct {
	name      string
	threshold float64
	below     bool
	crossings []plotPoint
	seen      int  // crossings seen
	stride    int  // keep one crossing in stride
	safe      bool // the last point was on the safe side
}

func (r *plotRule) beyond(v float64) bool {
	if r.below {
		return v < r.threshold
	}
	return v > r.threshold
}

// observe notes a crossing: the first point beyond the threshold after one
// on the safe side.
func (r *plotRule) observe(t int64, v float64) {
	if !r.beyond(v) {
		r.safe = true
		return
	}
	if !r.safe {
		return
	}
	r.safe = false
	r.seen++
	if r.stride == 0 {
		r.stride = 1
	}
	if (r.seen-1)%r.stride != 0 {
		return
	}
	if len(r.crossings) == maxCrossings {
		n := 0
		for i := 0; i < len(r.crossings); i += 2 {
			r.crossings[n] = r.crossings[i]
			n++
		}
		r.crossings = r.crossings[:n]
		r.stride *= 2
		if (r.seen-1)%r.stride != 0 {
			return
		}
	}
	r.crossings = append(r.crossings, plotPoint{t, v})
}

// obsBucket keeps the extremes of the points in one time bucket.
type obsBucket struct {
	n          int
	minT, maxT int64
	minV, maxV float64
}

func (b *obsBucket) add(t int64, v float64) {
	if b.n == 0 || v < b.minV {
		b.minT, b.minV = t, v
	}
	if b.n == 0 || v > b.maxV {
		b.maxT, b.maxV = t, v
	}
	b.n++
}

func (b *obsBucket) merge(o *obsBucket) {
	if o.n == 0 {
		return
	}
	if b.n == 0 || o.minV < b.minV {
		b.minT, b.minV = o.minT, o.minV
	}
	if b.n == 0 || o.maxV > b.maxV {
		b.maxT, b.maxV = o.maxT, o.maxV
	}
	b.n += o.n
}

// obsSeries is the observed series folded into at most obsBuckets buckets
// of equal width; the width doubles whenever the data outgrow them, so
// memory stays fixed however long the file, and spikes survive as the
// extremes of their bucket.
type obsSeries struct {
	t0, width  int64
	b          []obsBucket
	n          int
	tMin, tMax int64
	vMin, vMax float64
}

func (s *obsSeries) add(t int64, v float64) {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return
	}
	if s.n == 0 {
		s.t0, s.width = t, 1
		s.tMin, s.tMax, s.vMin, s.vMax = t, t, v, v
	}
	s.n++
	s.tMin, s.tMax = min(s.tMin, t), max(s.tMax, t)
	s.vMin, s.vMax = min(s.vMin, v), max(s.vMax, v)
	d := max(t-s.t0, 0) // a point a little late for the first goes in its bucket
	i := d / s.width
	for i >= obsBuckets {
		s.fold()
		i = d / s.width
	}
	for int64(len(s.b)) <= i {
		s.b = append(s.b, obsBucket{})
	}
	s.b[i].add(t, v)
}

// fold merges pairs of buckets and doubles the width.
func (s *obsSeries) fold() {
	n := (len(s.b) + 1) / 2
	for j := 0; j < n; j++ {
		b := s.b[2*j]
		if 2*j+1 < len(s.b) {
			b.merge(&s.b[2*j+1])
		}
		s.b[j] = b
	}
	s.b = s.b[:n]
	s.width *= 2
}

// plotCollector is a stream.Emitter that keeps what the chart needs. It
// decides at collection time which forecast records to keep: the first of
// each --plot-every slot of the data's clock (the record at the multiple
// itself when there is one), the one at the origin of every breach event,
// and the last. The Processor publishes a forecast record before the
// breach events of the same origin, so the newest record waits until the
// next one arrives to learn whether an event claimed it.
type plotCollector struct {
	mu      sync.Mutex
	file    string
	every   int64 // ms
	auto    bool  // thin the regular origins to maxAutoFans
	obs     obsSeries
	rules   []plotRule
	fans    []plotFan
	pending plotFan
	waiting bool       // pending holds a record
	slot    int64      // slot of the last record
	early   []plotMark // breach events whose forecast record has not come
	events  []plotEvent
	engines []string
	records int
}

// newPlotCollector returns a collector for the series metric of the file
// named file. Rules that do not select the series are left out.
func newPlotCollector(file, metric string, rules []forecast.Rule, every time.Duration, auto bool) *plotCollector {
	c := &plotCollector{file: file, every: max(every.Milliseconds(), 1), auto: auto}
	for _, r := range rules {
		if !r.Match.Match(metric, nil) {
			continue
		}
		c.rules = append(c.rules, plotRule{name: r.Name, threshold: r.Threshold, below: r.Direction == forecast.Below})
	}
	return c
}

// Observe records a point the Processor accepted.
func (c *plotCollector) Observe(t int64, v float64) {
	c.mu.Lock()
	defer c.mu.Unlock()
	c.obs.add(t, v)
	for i := range c.rules {
		c.rules[i].observe(t, v)
	}
}

// Forecast implements stream.Emitter.
func (c *plotCollector) Forecast(r *stream.ForecastRecord) {
	origin, ok := recordTime(r.At)
	if !ok {
		return
	}
	c.mu.Lock()
	defer c.mu.Unlock()
	c.records++
	if i, found := slices.BinarySearch(c.engines, r.Engine); !found {
		c.engines = slices.Insert(c.engines, i, r.Engine)
	}
	var buf []fanPoint
	if c.waiting {
		if c.pending.regular || c.pending.breach {
			c.fans = append(c.fans, c.pending)
		} else {
			buf = c.pending.points[:0] // dropped: reuse its memory
		}
	}
	slot := floorDiv(origin, c.every)
	f := plotFan{origin: origin, slot: slot, regular: c.records == 1 || slot != c.slot, engine: r.Engine, points: buf}
	c.slot, c.waiting = slot, true
	if r.CycleSeconds == 0 && finite(r.Level) {
		// Without a cycle the level is the mean at the origin: the fan
		// starts there, from a point, rather than one step later.
		f.points = append(f.points, fanPoint{origin, r.Level, r.Level, r.Level, r.Level, r.Level})
	}
	for _, p := range r.Points {
		t, ok := recordTime(p.T)
		if ok && finite(p.Mean) && finite(p.Lower80) && finite(p.Upper80) && finite(p.Lower95) && finite(p.Upper95) {
			f.points = append(f.points, fanPoint{t, p.Mean, p.Lower80, p.Upper80, p.Lower95, p.Upper95})
		}
	}
	// Breach events that came before their record.
	c.early = slices.DeleteFunc(c.early, func(m plotMark) bool {
		if m.at == origin {
			f.breach = true
			f.opened = f.opened || m.opened
		}
		return m.at <= origin
	})
	c.pending = f
}

// Breach implements stream.Emitter.
func (c *plotCollector) Breach(r *stream.BreachRecord) {
	at, ok := recordTime(r.At)
	if !ok {
		return
	}
	eta, _ := recordTime(r.ETA)
	c.mu.Lock()
	defer c.mu.Unlock()
	c.events = append(c.events, plotEvent{at: at, eta: eta, state: r.State, rule: r.Rule, incident: r.Incident, threshold: r.Threshold, prob: r.Probability})
	opened := r.State == string(forecast.Opened)
	switch {
	case c.waiting && c.pending.origin == at:
		c.pending.breach = true
		c.pending.opened = c.pending.opened || opened
	case len(c.fans) > 0 && c.fans[len(c.fans)-1].origin == at:
		f := &c.fans[len(c.fans)-1]
		f.breach, f.opened = true, f.opened || opened
	case !c.waiting || at > c.pending.origin:
		c.early = append(c.early, plotMark{at, opened})
	}
}

// Reject implements stream.Emitter; replay reads no wire messages.
func (c *plotCollector) Reject(*stream.RejectRecord) {}

// teeEmitter hands every record to two emitters.
type teeEmitter struct{ a, b stream.Emitter }

func (t teeEmitter) Forecast(r *stream.ForecastRecord) { t.a.Forecast(r); t.b.Forecast(r) }
func (t teeEmitter) Breach(r *stream.BreachRecord)     { t.a.Breach(r); t.b.Breach(r) }
func (t teeEmitter) Reject(r *stream.RejectRecord)     { t.a.Reject(r); t.b.Reject(r) }

// recordTime parses a record's RFC3339 time; empty is not a time.
func recordTime(s string) (int64, bool) {
	if s == "" {
		return 0, false
	}
	t, err := time.Parse(time.RFC3339, s)
	if err != nil {
		return 0, false
	}
	return t.UnixMilli(), true
}

func finite(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }

func floorDiv(a, b int64) int64 {
	q := a / b
	if (a%b != 0) && ((a < 0) != (b < 0)) {
		q--
	}
	return q
}

// pin keeps a value within ±maxMagnitude.
func pin(x float64) float64 { return max(-maxMagnitude, min(maxMagnitude, x)) }
