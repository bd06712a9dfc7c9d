package backtest

import (
	"context"
	"math"
	"reflect"
	"testing"
	"time"
)

// Results do not depend on the number of workers.
func TestEvaluateDeterministic(t *testing.T) {
	s := loadTestSuite(t)
	series := s.Generate(5, 1)[:4]
	opt := Options{BreachEvery: 30 * time.Minute}
	opt.Workers = 1
	a, err := Evaluate(context.Background(), series, opt)
	if err != nil {
		t.Fatal(err)
	}
	opt.Workers = 3
	b, err := Evaluate(context.Background(), series, opt)
	if err != nil {
		t.Fatal(err)
	}
	// NaN leads compare unequal; blank them first.
	for _, rs := range [][]Result{a, b} {
		for i := range rs {
			if rs[i].Alerts != nil && math.IsNaN(rs[i].Alerts.Lead) {
				rs[i].Alerts.Lead = -99
			}
		}
	}
	if !reflect.DeepEqual(a, b) {
		t.Error("results differ between 1 and 3 workers")
	}
	if a[0].Origins == 0 || a[0].Alerts == nil {
		t.Errorf("nothing scored: %+v", a[0])
	}
}

func TestScoreIncidents(t *testing.T) {
	const h = hourMs
	horizon := 24 * time.Hour
	for _, c := range []struct {
		name     string
		ev       []breachEvent
		crossing int64
		lead     float64
		missed   bool
		flaps    int
	}{
		{"open at crossing", []breachEvent{{100 * h, "opened"}, {120 * h, "resolved"}}, 112 * h, 0.5, false, 0},
		{"still open", []breachEvent{{100 * h, "opened"}}, 124 * h, 1, false, 0},
		{"late", []breachEvent{{130 * h, "opened"}}, 124 * h, -0.25, true, 0},
		{"resolved before", []breachEvent{{100 * h, "opened"}, {101 * h, "resolved"}}, 124 * h, math.NaN(), true, 0},
		{"flap", []breachEvent{{100 * h, "opened"}, {101 * h, "resolved"}, {102 * h, "opened"}}, 120 * h, 18.0 / 24, false, 1},
		{"no flap after 3h", []breachEvent{{100 * h, "opened"}, {101 * h, "resolved"}, {104 * h, "opened"}}, 0, math.NaN(), false, 0},
		{"updates ignored", []breachEvent{{100 * h, "opened"}, {101 * h, "updated"}}, 106 * h, 0.25, false, 0},
	} {
		var a Alerts
		scoreIncidents(&a, c.ev, c.crossing, horizon)
		if !(a.Lead == c.lead || math.Abs(a.Lead-c.lead) < 1e-12 || (math.IsNaN(a.Lead) && math.IsNaN(c.lead))) || a.Missed != c.missed || a.Flaps != c.flaps {
			t.Errorf("%s: lead %v missed %v flaps %d; want %v %v %d", c.name, a.Lead, a.Missed, a.Flaps, c.lead, c.missed, c.flaps)
		}
	}
}

func TestReaction(t *testing.T) {
	const m = 60_000
	sig := timeline{t: []int64{0, 60 * m, 120 * m, 180 * m, 240 * m}, v: []float64{0, 0, 1, 1, 1}}
	rec := func(origin int64, mean float64) fcRecord {
		return fcRecord{origin: origin, points: []fcPoint{{t: origin + 60*m, mean: mean}}}
	}
	// Change at 60 min; the +1h forecast is right from 90 min on.
	recs := []fcRecord{rec(60*m, 0), rec(90*m, 1), rec(120*m, 1), rec(150*m, 1), rec(180*m, 1)}
	if got := reaction(recs, &sig, 60*m, 0.1, 30*m, false); got != 30*time.Minute {
		t.Errorf("reaction %v, want 30m", got)
	}
	// Never within tolerance for a whole hour.
	recs = []fcRecord{rec(60*m, 0), rec(90*m, 1), rec(120*m, 0)}
	if got := reaction(recs, &sig, 60*m, 0.1, 30*m, false); got != -1 {
		t.Errorf("reaction %v, want -1", got)
	}
}
