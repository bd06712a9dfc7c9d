package stream

import (
	"math"
	"testing"
	"time"

	"github.com/headroom-dev/headroom/forecast"
	"github.com/headroom-dev/headroom/state"
)

type discard struct{}

func (discard) Forecast(*ForecastRecord) {}
func (discard) Breach(*BreachRecord)     {}
func (discard) Reject(*RejectRecord)     {}

// BenchmarkEvaluate measures one whole evaluation of a series with a week
// of history, as the pipeline runs it when a bucket closes: view copy,
// engine fit, forecast points, record, and one rule's projection and
// lifecycle step.
func BenchmarkEvaluate(b *testing.B) {
	store, err := state.New(state.Config{Partitions: 1})
	if err != nil {
		b.Fatal(err)
	}
	m, _ := forecast.ParseMatch("")
	p, err := NewProcessor(store, discard{}, Config{
		Rules:       []forecast.Rule{{Name: "r", Match: m, Threshold: 1e9, Direction: forecast.Above, Horizon: 24 * time.Hour}},
		EveryRecord: true,
	})
	if err != nil {
		b.Fatal(err)
	}
	w := p.NewWorker()
	start := time.Date(2026, 11, 1, 0, 0, 0, 0, time.UTC)
	// A week and a day of one-minute points: a daily wave on a slow trend
	// (invented benchmark data).
	for i := 0; i < 8*24*60; i++ {
		h := float64(i) / 60
		v := 100 + 0.5*h + 20*math.Sin(2*math.Pi*h/24)
		if err := w.Add("bench", nil, start.Add(time.Duration(i)*time.Minute).UnixMilli(), v); err != nil {
			b.Fatal(err)
		}
	}
	k := state.MakeKey(nil, []byte("bench"), nil)
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		store.Do(k, func(s *state.Series) {
			s.Memo().Evaluated = 0
			w.evaluate(s)
		})
	}
	b.StopTimer()
	store.Do(k, func(s *state.Series) { s.View(&w.view, 0) })
	b.ReportMetric(float64(w.view.Len()), "points")
}
