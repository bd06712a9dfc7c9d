package forecast

import "github.com/headroom-dev/headroom/state"

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

// Choose picks the engine for a series: the one named by override when that
// names an engine, otherwise the best for the history. For now that is
// always incline.
func Choose(v *state.View, override string) Engine {
	if override != "" {
		if e, ok := Lookup(override); ok {
			return e
		}
	}
	return Incline{}
}
