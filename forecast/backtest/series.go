package backtest

import (
	"time"

	"github.com/headroom-dev/headroom/forecast"
)

// Series is one metric to evaluate. T and V hold the points in the order
// they are fed to the processor (file order for real data, which may hold
// duplicates or a step back in time; the processor refuses what it would
// refuse in production).
type Series struct {
	Name   string
	Family string        // scenario family, or the folder of a real file
	Step   time.Duration // native step: the median spacing of the points
	T      []int64       // unix ms
	V      []float64
	// EvalFrom is the first origin scored, unix ms; 0 means the first
	// timestamp plus the options' warm-up.
	EvalFrom int64
	// Signal is the noise-free signal at T for invented series, nil for
	// real data.
	Signal []float64
	// Truth is what the series should provoke; nil for real data.
	Truth *Truth
}

// Truth describes what an invented series should provoke.
type Truth struct {
	// The rule a user would set on the series; HasRule false when none.
	HasRule   bool
	Threshold float64
	Direction forecast.Direction
	// Crossing is when the noise-free signal first reaches the threshold,
	// unix ms; 0 if it never does.
	Crossing int64
	// Incident says whether an incident should open.
	Incident bool
	// Change is when a sustained change of behaviour starts (a level shift
	// or a change of slope), unix ms; 0 when there is none. ChangeSize is
	// its size in the series' units: the level shift, or for a change of
	// slope how far the new regime is from the old one a day later.
	Change     int64
	ChangeSize float64
	// SlopeChange says the change is one of slope. Its reaction is judged
	// on the forecast at the horizon, since a new slope hardly shows in
	// the first hour.
	SlopeChange bool
	// Noise is the standard deviation of the Gaussian part of the noise.
	Noise float64
}
