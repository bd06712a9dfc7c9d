package forecast

import (
	"testing"

	"github.com/headroom-dev/headroom/state"
)

// weekView is a view at the default layout with more than a week of
// history: 312 hourly, 88 fifteen-minute and 120 one-minute composite
// points, plus the three levels. Invented data: a slow fill with noise.
func weekView(tb testing.TB) *state.View {
	tb.Helper()
	const minutes = 15 * 1440
	s := newSeries(minutes, 0.01, 42, func(i int) float64 { return 0.3 + 0.4*float64(i)/minutes })
	var v state.View
	s.view(s.end(minutes-1), &v)
	if len(v.T) != 520 {
		tb.Fatalf("week view has %d composite points, want 520", len(v.T))
	}
	return &v
}

func BenchmarkInclineFit(b *testing.B) {
	v := weekView(b)
	sc := NewScratch()
	var f Forecast
	e := Incline{}
	if !e.Fit(v, sc, &f) {
		b.Fatal("fit failed")
	}
	b.ReportAllocs()
	for b.Loop() {
		e.Fit(v, sc, &f)
	}
}

func BenchmarkProject(b *testing.B) {
	v := weekView(b)
	var f Forecast
	if !(Incline{}).Fit(v, NewScratch(), &f) {
		b.Fatal("fit failed")
	}
	r := Rule{Threshold: 0.9, Direction: Above}
	r.Defaults()
	b.ReportAllocs()
	for b.Loop() {
		Project(&f, &r)
	}
}

// A level shift inside the minute buckets: the scan takes more than one
// round.
func BenchmarkInclineFitShift(b *testing.B) {
	const minutes = 15 * 1440
	s := newSeries(minutes, 0.01, 42, func(i int) float64 {
		if i >= minutes-40 {
			return 0.2
		}
		return 0.3 + 0.4*float64(i)/minutes
	})
	var v state.View
	s.view(s.end(minutes-1), &v)
	sc := NewScratch()
	var f Forecast
	if !(Incline{}).Fit(&v, sc, &f) || f.Support != 40 {
		b.Fatalf("fit %+v", f)
	}
	b.ReportAllocs()
	for b.Loop() {
		Incline{}.Fit(&v, sc, &f)
	}
}
