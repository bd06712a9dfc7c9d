// Package forecast turns a series' bucket history into forecasts with
// prediction intervals, projects when a forecast crosses a rule's threshold,
// and drives the alert lifecycle of each rule on each series.
//
// Engines read a state.View and fill a Forecast; they keep no state of their
// own between calls, so a forecast depends only on the history it is given
// (and on the small per-series caches the caller keeps: Cycles and
// state.Calibration).
//
//   - "incline" finds the current regime of a series with a changepoint scan
//     over prefix sums and fits it with Huber-weighted least squares, so a
//     single spike does not tilt the trend and a level shift is followed
//     without an erratic jump: while the new regime is short the bands widen
//     instead. A slope is extrapolated only as far as its evidence and its
//     age allow.
//   - "tide" forecasts a cycle that DetectCycles found by autocorrelation: a
//     robust seasonal profile on top of incline's level and slope of the
//     deseasonalized history.
//
// Choose picks the engine per series. A Forecast is a predictive
// distribution around a mean (a line, plus a seasonal profile for tide),
// normal in its core with each side scaled by Calibration, which checks a
// series' past forecasts against what arrived (adaptive conformal
// inference). Band and Points read intervals from it, and Project turns it
// into the probability of crossing a Rule's threshold within the rule's
// horizon and the times at which the mean and the 80 % bounds cross.
// Advance runs the alert lifecycle of a rule on a series from successive
// projections, with hysteresis in probability and time so that an incident
// neither flaps nor opens on a single spike. Rules come from a JSON file
// (ParseRules) and pick series with a small selector language (ParseMatch).
//
// HoltWinters, TheilSen and Siegel are published methods the evaluation in
// forecast/backtest uses as baselines; they are checked against R and
// SciPy outputs.
package forecast
