package backtest

import (
	"time"

	"github.com/headroom-dev/headroom/stream"
)

// fcPoint is one step of a captured forecast record.
type fcPoint struct {
	t                                  int64
	mean, lower80, upper80, lo95, up95 float64
}

// fcRecord is a captured forecast record.
type fcRecord struct {
	origin int64
	points []fcPoint
}

// breachEvent is a captured breach event.
type breachEvent struct {
	at    int64
	state string
}

// capture is the Emitter of one series' processor. Each series has its
// own processor fed from one goroutine, so no locking is needed.
type capture struct {
	records []fcRecord
	events  []breachEvent
	ends    bool // keep only the first and the last step of each record
	bad     int  // records whose times did not parse
}

func (c *capture) Forecast(r *stream.ForecastRecord) {
	at, ok := parseRecordTime(r.At)
	if !ok {
		c.bad++
		return
	}
	pts := r.Points
	if c.ends && len(pts) > 2 {
		pts = []stream.ForecastPoint{pts[0], pts[len(pts)-1]}
	}
	rec := fcRecord{origin: at, points: make([]fcPoint, 0, len(pts))}
	for _, p := range pts {
		t, ok := parseRecordTime(p.T)
		if !ok {
			c.bad++
			continue
		}
		rec.points = append(rec.points, fcPoint{t, p.Mean, p.Lower80, p.Upper80, p.Lower95, p.Upper95})
	}
	c.records = append(c.records, rec)
}

func (c *capture) Breach(r *stream.BreachRecord) {
	at, ok := parseRecordTime(r.At)
	if !ok {
		c.bad++
		return
	}
	c.events = append(c.events, breachEvent{at: at, state: r.State})
}

func (c *capture) Reject(*stream.RejectRecord) {}

func parseRecordTime(s string) (int64, bool) {
	t, err := time.Parse(time.RFC3339, s)
	if err != nil {
		return 0, false
	}
	return t.UnixMilli(), true
}
