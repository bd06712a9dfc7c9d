package stream

import (
	"errors"
	"strings"
)

// Subjects derives every subject headroom uses from one prefix.
//
//	<prefix>.points.>          ingest (producers publish below it)
//	<prefix>.forecast.<token>  forecast records
//	<prefix>.breach.<token>    breach events
//	<prefix>.rejected          refused input
type Subjects struct {
	Prefix string
}

// DefaultPrefix is the subject prefix when none is configured.
const DefaultPrefix = "headroom"

// Check reports whether the prefix is usable: one or more dot-separated
// tokens without wildcards or white space.
func (s Subjects) Check() error {
	p := s.prefix()
	if strings.ContainsAny(p, " \t\r\n*>") {
		return errors.New("stream: subject prefix must not contain white space or wildcards")
	}
	for _, tok := range strings.Split(p, ".") {
		if tok == "" {
			return errors.New("stream: subject prefix has an empty token")
		}
	}
	return nil
}

func (s Subjects) prefix() string {
	if s.Prefix == "" {
		return DefaultPrefix
	}
	return s.Prefix
}

// Points is the wildcard subject the sidecar subscribes to.
func (s Subjects) Points() string { return s.prefix() + ".points.>" }

// PointsBase is the subject producers publish to, optionally followed by
// more tokens of their choosing.
func (s Subjects) PointsBase() string { return s.prefix() + ".points" }

// Forecast is the subject of one series' forecast records.
func (s Subjects) Forecast(token string) string { return s.prefix() + ".forecast." + token }

// Breach is the subject of one series' breach events.
func (s Subjects) Breach(token string) string { return s.prefix() + ".breach." + token }

// AllForecasts and AllBreaches are wildcards for consumers of every series.
func (s Subjects) AllForecasts() string { return s.prefix() + ".forecast.*" }

// AllBreaches is the wildcard for every series' breach events.
func (s Subjects) AllBreaches() string { return s.prefix() + ".breach.*" }

// Rejected is the subject of refused input.
func (s Subjects) Rejected() string { return s.prefix() + ".rejected" }
