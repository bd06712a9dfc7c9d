// Package backtest measures headroom's forecasts and breach alerts against
// simple baselines, on real metric files and on an invented scenario suite.
//
// A Series is fed point by point into a real stream.Processor, exactly as
// the replay command does, and the forecast records it emits are scored by
// rolling origin: at every hourly origin after a warm-up, each forecast step
// (+1h … +24h) is compared with the raw observation at that time, and the
// same origins are forecast by baselines (naive, drift, least squares,
// Holt's linear method, seasonal naive and Theil–Sen) from the raw history
// of the week before the origin. A Report pools the errors into MAE by
// horizon, MASE, the relative MAE of the engine against each baseline
// (geometric mean over series), the coverage of the 80 % and 95 % bands and
// the interval score of the 95 % band.
//
// Invented series also carry their truth: the noise-free signal, the rule a
// user would set on them, when (if ever) the signal crosses it, and when a
// sustained change happens. A second pass with a rule and a five-minute
// cadence scores the alerts: incidents opened where none should, lead time
// before true crossings, flapping and misses, and how long the forecast
// takes to follow a change.
//
// Families of invented series are described in a JSON file
// (testdata/scenarios.json in the repository) and generated
// deterministically from a seed; real series are read from folders of
// timestamp,value CSV files with LoadDir.
package backtest
