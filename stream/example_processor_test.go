package stream_test

import (
	"fmt"
	"time"

	"github.com/headroom-dev/headroom/forecast"
	"github.com/headroom-dev/headroom/state"
	"github.com/headroom-dev/headroom/stream"
)

// printBreaches is an Emitter that prints breach events and ignores the rest.
type printBreaches struct{}

func (printBreaches) Forecast(*stream.ForecastRecord) {}
func (printBreaches) Reject(*stream.RejectRecord)     {}
func (printBreaches) Breach(r *stream.BreachRecord) {
	fmt.Printf("%s %s %s at %s, crossing about %s\n", r.Rule, r.State, r.Series, r.At, r.ETA)
}

// A Processor without a bus: feed a volume that fills by 5 % an hour and
// watch the rule open an incident (invented example data). The series is
// new, so the rule waives the warm-up; and a trend seen for four hours is
// trusted about that far ahead, so the incident opens once the crossing is
// that close.
func ExampleProcessor() {
	store, _ := state.New(state.Config{Partitions: 1})
	all, _ := forecast.ParseMatch("")
	rule := forecast.Rule{Name: "volume-full", Match: all, Threshold: 0.9, Direction: forecast.Above, Horizon: 6 * time.Hour, Warmup: -1}
	p, _ := stream.NewProcessor(store, printBreaches{}, stream.Config{Rules: []forecast.Rule{rule}, Every: 10 * time.Minute})
	w := p.NewWorker()
	start := time.Date(2026, 12, 1, 0, 0, 0, 0, time.UTC)
	for m := 0; m < 6*60; m++ {
		_ = w.Add("volume_used_ratio", nil, start.Add(time.Duration(m)*time.Minute).UnixMilli(), 0.5+0.05*float64(m)/60)
	}
	// Output:
	// volume-full opened volume_used_ratio at 2026-12-01T04:20:00Z, crossing about 2026-12-01T08:00:30Z
}
