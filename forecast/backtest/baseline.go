package backtest

import (
	"math"
	"time"
)

// Methods scored, the engine first. The baselines follow common practice
// (Hyndman & Athanasopoulos, "Forecasting: Principles and Practice", ch. 5
// for naive, drift and seasonal naive).
const (
	Engine = iota
	Naive
	Drift
	LeastSquares
	Holt
	SeasonalNaive
	TheilSen
	nMethods
)

// MethodName names method m: "engine" or a baseline.
func MethodName(m int) string {
	switch m {
	case Engine:
		return "engine"
	case Naive:
		return "naive"
	case Drift:
		return "drift"
	case LeastSquares:
		return "lsq"
	case Holt:
		return "holt"
	case SeasonalNaive:
		return "snaive"
	case TheilSen:
		return "theilsen"
	}
	return "?"
}

// NumMethods is the number of scored methods: the engine and the baselines.
const NumMethods = nMethods

const hourMs = int64(time.Hour / time.Millisecond)
const dayMs = 24 * hourMs

// baseliner forecasts from the raw history before an origin; it keeps
// scratch between origins.
type baseliner struct {
	tl       *timeline
	history  int64 // ms
	halfStep int64
	// scratch
	hx, hy []float64 // hourly buckets' mean times (hours from the origin) and mean values
	filled []float64 // hourly means with gaps interpolated, for Holt
	lastX  float64   // time of filled's last value, hours from the origin
	sum    []float64
	sumT   []float64
	cnt    []int
}

// at fills out[m][k] for every baseline m and target time targets[k] from
// the points in [origin − history, origin). It returns false when that
// window is empty.
func (b *baseliner) at(origin int64, targets []int64, out *[nMethods][]float64) bool {
	tl := b.tl
	i0, i1 := tl.search(origin-b.history), tl.search(origin)
	if i1 <= i0 {
		return false
	}
	for m := Naive; m < nMethods; m++ {
		out[m] = out[m][:0]
	}
	ts, vs := tl.t[i0:i1], tl.v[i0:i1]
	last, lastT := vs[len(vs)-1], ts[len(ts)-1]

	// Drift: the line through the first and the last observation.
	dslope := 0.0
	if dt := ts[len(ts)-1] - ts[0]; dt > 0 {
		dslope = (last - vs[0]) / float64(dt)
	}
	// Least squares over the raw window, time in hours from the origin;
	// two passes for accuracy.
	lsA, lsB := last, 0.0
	if len(ts) >= 2 {
		var mx, my float64
		for i := range ts {
			mx += float64(ts[i]-origin) / float64(hourMs)
			my += vs[i]
		}
		mx /= float64(len(ts))
		my /= float64(len(ts))
		var sxx, sxy float64
		for i := range ts {
			dx := float64(ts[i]-origin)/float64(hourMs) - mx
			sxx += dx * dx
			sxy += dx * (vs[i] - my)
		}
		if sxx > 0 {
			lsB = sxy / sxx
			lsA = my - lsB*mx
		}
	}
	b.hourly(origin, ts, vs)
	var hw holtForecaster
	if len(b.filled) >= 3 {
		hw = fitHolt(b.filled)
	}
	tsSlope, tsIcpt := 0.0, last
	if len(b.hx) >= 2 {
		if s, i, ok := theilSen(b.hx, b.hy); ok {
			tsSlope, tsIcpt = s, i
		}
	}
	for _, T := range targets {
		xh := float64(T-origin) / float64(hourMs)
		out[Naive] = append(out[Naive], last)
		out[Drift] = append(out[Drift], last+dslope*float64(T-lastT))
		out[LeastSquares] = append(out[LeastSquares], lsA+lsB*xh)
		h := last
		if hw != nil {
			// Holt's steps are hours after the last mean's time; its
			// forecast is linear in the step, so the value at a
			// fractional step interpolates exactly.
			s := xh - b.lastX
			k := max(math.Floor(s), 1) // Forecast counts steps from 1
			f0 := hw.Forecast(int(k))
			f1 := hw.Forecast(int(k) + 1)
			h = f0 + (s-k)*(f1-f0)
		}
		out[Holt] = append(out[Holt], h)
		out[SeasonalNaive] = append(out[SeasonalNaive], b.seasonal(origin, T, i0, i1, last))
		out[TheilSen] = append(out[TheilSen], tsIcpt+tsSlope*xh)
	}
	return true
}

// seasonal is the seasonal naive forecast with a period of one day: the
// observation one (or more) whole days before T that lies before the
// origin, nearest within half a native step; the last value while the
// history is shorter than that.
func (b *baseliner) seasonal(origin, T int64, i0, i1 int, last float64) float64 {
	k := (T-origin)/dayMs + 1
	s := T - k*dayMs
	if s >= origin { // T exactly a whole number of days ahead
		s -= dayMs
	}
	if v, ok := b.tl.nearest(s, b.halfStep, i0, i1); ok {
		return v
	}
	return last
}

// hourly fills hx, hy with the means of time and value of the non-empty
// hourly buckets of the window (time in hours from the origin), and filled
// with the means from the first non-empty bucket on, gaps interpolated
// linearly.
func (b *baseliner) hourly(origin int64, ts []int64, vs []float64) {
	nb := int((b.history + hourMs - 1) / hourMs)
	if cap(b.sum) < nb {
		b.sum, b.sumT, b.cnt = make([]float64, nb), make([]float64, nb), make([]int, nb)
	}
	b.sum, b.sumT, b.cnt = b.sum[:nb], b.sumT[:nb], b.cnt[:nb]
	clear(b.sum)
	clear(b.sumT)
	clear(b.cnt)
	for i, t := range ts {
		k := nb - 1 - int((origin-1-t)/hourMs)
		if k < 0 || k >= nb {
			continue
		}
		b.sum[k] += vs[i]
		b.sumT[k] += float64(t-origin) / float64(hourMs)
		b.cnt[k]++
	}
	b.hx, b.hy, b.filled = b.hx[:0], b.hy[:0], b.filled[:0]
	prev := -1
	for k := range nb {
		if b.cnt[k] == 0 {
			continue
		}
		m := b.sum[k] / float64(b.cnt[k])
		b.hx = append(b.hx, b.sumT[k]/float64(b.cnt[k]))
		b.hy = append(b.hy, m)
		if prev >= 0 {
			pm := b.filled[len(b.filled)-1]
			for j := prev + 1; j < k; j++ {
				b.filled = append(b.filled, pm+(m-pm)*float64(j-prev)/float64(k-prev))
			}
		}
		b.filled = append(b.filled, m)
		prev = k
	}
	// Holt forecasts from the end of the last non-empty bucket; when the
	// newest buckets are empty, pad with the last mean so that its steps
	// stay aligned with the origin.
	if prev >= 0 {
		b.lastX = b.hx[len(b.hx)-1]
		pm := b.filled[len(b.filled)-1]
		for j := prev + 1; j < nb; j++ {
			b.filled = append(b.filled, pm)
			b.lastX = float64(j-nb) + 0.5
		}
	}
}
