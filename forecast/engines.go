package forecast

import (
	"time"

	"github.com/headroom-dev/headroom/state"
)

// Engines returns the available engines, a new slice on every call.
func Engines() []Engine {
	return []Engine{Incline{}}
}

// Lookup returns the engine with this name.
func Lookup(name string) (Engine, bool) {
	// A switch rather than a search of Engines: no allocation per call.
	switch name {
	case Incline{}.Name():
		return Incline{}, true
	}
	return nil, false
}

// Cycles is what cycle detection found in a history.
type Cycles struct {
	At      int64         // unix ms: end of the newest hourly bucket the detection saw
	Period  time.Duration // 0 when there is no cycle
	Period2 time.Duration // a second, longer cycle; 0 when none
	ACF     float64       // autocorrelation of the detrended history at Period
}

// Choose picks the engine for a series: the one named by override when that
// names an engine, otherwise the best for the history. c caches cycle
// detection between calls for one series (nil detects afresh); Choose
// refreshes it when the history has moved on. For now the choice is always
// incline.
func Choose(v *state.View, sc *Scratch, c *Cycles, override string) Engine {
	if override != "" {
		if e, ok := Lookup(override); ok {
			return e
		}
	}
	return Incline{}
}
