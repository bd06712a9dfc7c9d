package forecast

import (
	"time"

	"github.com/headroom-dev/headroom/state"
)

// Engines returns the available engines, a new slice on every call.
func Engines() []Engine {
	return []Engine{Incline{}, Tide{}}
}

// Lookup returns the engine with this name.
func Lookup(name string) (Engine, bool) {
	// A switch rather than a search of Engines: no allocation per call.
	switch name {
	case Incline{}.Name():
		return Incline{}, true
	case Tide{}.Name():
		return Tide{}, true
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
// names an engine, otherwise the best for the history: Tide when the
// history has a cycle that Tide can fit, Incline otherwise.
//
// c caches cycle detection between calls for one series (nil detects
// afresh). Choose runs DetectCycles only when c.At differs from the end of
// v's newest hourly bucket, that is once per new hourly bucket, and stores
// the result in *c. The Tide it returns is a *Tide held in sc, valid until
// sc is passed to Choose again, so that Choose allocates nothing in steady
// state; a nil sc allocates.
func Choose(v *state.View, sc *Scratch, c *Cycles, override string) Engine {
	if override != "" {
		if e, ok := Lookup(override); ok {
			return e
		}
	}
	if v == nil {
		return Incline{}
	}
	if sc == nil {
		sc = NewScratch()
	}
	var fresh Cycles
	if c == nil {
		fresh = DetectCycles(v, sc)
		c = &fresh
	} else if c.At != cyclesAt(v) {
		old := *c
		*c = DetectCycles(v, sc)
		// A cycle does not drift: a period found a lag or two off the one
		// held so far is noise moving a flat peak, and switching would
		// misalign the profile with what the history holds.
		if old.Period > 0 && c.Period > 0 && c.Period != old.Period &&
			absDur(c.Period-old.Period)*12 <= old.Period {
			c.Period = old.Period
		}
	}
	if c.Period <= 0 {
		return Incline{}
	}
	t := &sc.tide
	*t = Tide{Cycles: *c}
	if !t.fits(v) {
		return Incline{}
	}
	return t
}

func absDur(d time.Duration) time.Duration {
	if d < 0 {
		return -d
	}
	return d
}
