package forecast

import (
	"fmt"
	"strconv"
	"strings"
)

// ParseDirection reads "above" or "below", in any letter case.
func ParseDirection(s string) (Direction, error) {
	d, ok := parseDirection(s)
	if !ok {
		return 0, fmt.Errorf("forecast: direction %q: want above or below", s)
	}
	return d, nil
}

func parseDirection(s string) (Direction, bool) {
	switch {
	case strings.EqualFold(s, "above"):
		return Above, true
	case strings.EqualFold(s, "below"):
		return Below, true
	}
	return 0, false
}

// String returns "above" or "below".
func (d Direction) String() string {
	switch d {
	case Above:
		return "above"
	case Below:
		return "below"
	}
	return "Direction(" + strconv.Itoa(int(d)) + ")"
}
