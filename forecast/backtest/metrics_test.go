package backtest

import (
	"math"
	"testing"
)

func TestWinkler(t *testing.T) {
	// Hand-worked from the definition (Gneiting & Raftery 2007, eq. 43):
	// width plus 2/alpha times the miss.
	for _, c := range []struct {
		lo, hi, y, alpha, want float64
	}{
		{0, 10, 5, 0.05, 10},           // inside: the width
		{0, 10, 12, 0.05, 10 + 40*2},   // 2 above: 10 + (2/0.05)·2
		{0, 10, -1, 0.05, 10 + 40*1},   // 1 below
		{2, 2, 2, 0.2, 0},              // a point interval that hits
		{0, 1, 1, 0.05, 1},             // on the bound counts as inside
		{-3, -1, 0, 0.1, 2 + 20},       // negative values
		{0, 10, 10.5, 0.5, 10 + 4*0.5}, // 80 %... any alpha
	} {
		if got := winkler(c.lo, c.hi, c.y, c.alpha); math.Abs(got-c.want) > 1e-12 {
			t.Errorf("winkler(%v, %v, %v, %v) = %v, want %v", c.lo, c.hi, c.y, c.alpha, got, c.want)
		}
	}
}

func TestNaiveScale(t *testing.T) {
	// Hand-worked: mean absolute first difference (Hyndman & Koehler 2006).
	tl := timeline{t: []int64{0, 1, 2, 3, 4}, v: []float64{1, 3, 2, 2, 6}}
	for _, c := range []struct {
		until int64
		want  float64
	}{
		{5, (2 + 1 + 0 + 4) / 4.0},
		{4, (2 + 1 + 0) / 3.0},
		{2, 2},                     // two points before 2
		{1, (2 + 1 + 0 + 4) / 4.0}, // fewer than two: the whole series
	} {
		if got := naiveScale(&tl, c.until); math.Abs(got-c.want) > 1e-12 {
			t.Errorf("naiveScale(until %d) = %v, want %v", c.until, got, c.want)
		}
	}
}

func TestWeightedGeoMean(t *testing.T) {
	for _, c := range []struct {
		name string
		x, w []float64
		want float64
	}{
		{"equal weights", []float64{1, 4}, []float64{1, 1}, 2},          // √(1·4)
		{"weights", []float64{2, 8}, []float64{3, 1}, math.Pow(2, 1.5)}, // (2³·8)^(1/4) = 2^1.5
		{"zero skipped", []float64{0, 9}, []float64{1, 1}, 9},
		{"inf skipped", []float64{math.Inf(1), 3}, []float64{1, 1}, 3},
		{"nothing", []float64{0}, []float64{1}, math.NaN()},
	} {
		got := weightedGeoMean(c.x, c.w)
		if !(math.Abs(got-c.want) < 1e-12 || (math.IsNaN(got) && math.IsNaN(c.want))) {
			t.Errorf("%s: %v, want %v", c.name, got, c.want)
		}
	}
}

func TestQuantile(t *testing.T) {
	// Hyndman & Fan type 7 by hand: h = q·(n−1).
	for _, c := range []struct {
		x    []float64
		q    float64
		want float64
	}{
		{[]float64{3, 1, 2}, 0.5, 2},
		{[]float64{4, 1, 2, 3}, 0.5, 2.5},
		{[]float64{1, 2, 3, 4, 5, 6, 7, 8, 9, 10}, 0.9, 9.1},
		{[]float64{5}, 0.9, 5},
		{[]float64{1, math.Inf(1)}, 0.5, math.Inf(1)},
	} {
		if got := quantile(c.x, c.q); got != c.want && math.Abs(got-c.want) > 1e-12 {
			t.Errorf("quantile(%v, %v) = %v, want %v", c.x, c.q, got, c.want)
		}
	}
}

// Baselines on a tiny hand-worked history: points every 30 minutes.
func TestBaselines(t *testing.T) {
	const h = hourMs
	// y = 10 + 2·(hours), with one odd value, over 26 hours; the origin at
	// 26h sees everything before it.
	var ts []int64
	var vs []float64
	for i := 0; i < 52; i++ {
		ts = append(ts, int64(i)*h/2)
		vs = append(vs, 10+float64(i))
	}
	tl := timeline{t: ts, v: vs}
	b := baseliner{tl: &tl, history: 7 * 24 * h, halfStep: h / 4}
	var out [nMethods][]float64
	origin := 26 * h
	if !b.at(origin, []int64{origin + h, origin + 24*h}, &out) {
		t.Fatal("no history")
	}
	last := vs[len(vs)-1] // 61, at 25.5h
	want := map[int][2]float64{
		Naive:         {last, last},
		Drift:         {last + 2*1.5, last + 2*24.5}, // slope 2 per hour from 25.5h
		LeastSquares:  {10 + 2*27, 10 + 2*50},        // exact line
		TheilSen:      {10 + 2*27, 10 + 2*50},        // exact line through hourly means
		Holt:          {10 + 2*27, 10 + 2*50},        // a straight line is Holt's fixed point
		SeasonalNaive: {vs[2], vs[48]},               // one day before: 3h → index 2... see below
	}
	// Seasonal naive: T − 24h = 3h (index 6) and 26h → 2 days before would
	// be before the data, so one day: T = 50h → 26h is not before the
	// origin, so two days: 2h (index 4).
	want[SeasonalNaive] = [2]float64{vs[6], vs[4]}
	for m, w := range want {
		for k := range 2 {
			if math.Abs(out[m][k]-w[k]) > 1e-6 {
				t.Errorf("%s step %d: %v, want %v", MethodName(m), k, out[m][k], w[k])
			}
		}
	}
	if b.at(0, []int64{h}, &out) {
		t.Error("a forecast from an empty history")
	}
}
