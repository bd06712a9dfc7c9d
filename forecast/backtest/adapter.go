package backtest

import (
	"math"

	"github.com/headroom-dev/headroom/forecast"
)

// This file is the seam to the estimators the baselines borrow from
// package forecast.

// holtForecaster forecasts h ≥ 1 steps past the end of the series it was
// fitted to.
type holtForecaster interface {
	Forecast(h int) float64
}

// fitHolt fits Holt's linear method (Holt–Winters without a season,
// parameters by least squares on the one-step errors) to x; nil when it
// cannot.
func fitHolt(x []float64) holtForecaster {
	f, err := forecast.FitHoltWinters(x, 0, false)
	if err != nil {
		return nil
	}
	if math.IsNaN(f.Level) || math.IsNaN(f.Trend) {
		return nil
	}
	return &f
}

// theilSen returns the Theil–Sen line through (x, y); ok is false when it
// is undefined (fewer than two distinct x).
func theilSen(x, y []float64) (slope, intercept float64, ok bool) {
	slope, intercept = forecast.TheilSen(x, y)
	return slope, intercept, !math.IsNaN(slope) && !math.IsNaN(intercept)
}
