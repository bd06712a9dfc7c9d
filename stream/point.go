package stream

import (
	"time"

	"github.com/headroom-dev/headroom/state"
)

// Point is one decoded point. Metric, label slices and Key.Text alias the
// message or the Decoder's scratch and are valid only inside the callback.
type Point struct {
	Metric []byte
	Labels []state.Label // sorted by name
	TS     int64         // unix ms
	Value  float64
	Key    state.Key // canonical key and hash, filled by the decoder
}

// Limits bound what a message and a point may be. Zero fields take the
// defaults shown; a count or size below zero also takes the default.
type Limits struct {
	MaxMessage int           // bytes per message, default 1 MiB
	MaxPoints  int           // points per message, default 10,000
	MaxLabels  int           // labels per point, default 32
	MaxName    int           // bytes of a metric or label name, default 256
	MaxValue   int           // bytes of a label value, default 1024
	MaxFuture  time.Duration // ts ahead of now, default 24h; negative means unlimited
	MaxPast    time.Duration // ts behind now, default 366 days; negative means unlimited
}

// withDefaults returns l with its zero fields filled in.
func (l Limits) withDefaults() Limits {
	if l.MaxMessage <= 0 {
		l.MaxMessage = 1 << 20
	}
	if l.MaxPoints <= 0 {
		l.MaxPoints = 10000
	}
	if l.MaxLabels <= 0 {
		l.MaxLabels = 32
	}
	if l.MaxName <= 0 {
		l.MaxName = 256
	}
	if l.MaxValue <= 0 {
		l.MaxValue = 1024
	}
	if l.MaxFuture == 0 {
		l.MaxFuture = 24 * time.Hour
	}
	if l.MaxPast == 0 {
		l.MaxPast = 366 * 24 * time.Hour
	}
	return l
}

// Reject says why one point or a whole message was refused.
type Reject struct {
	Index  int    // position of the point in the message, -1 for the whole message
	Reason string // one of the Reason constants
	Detail string // human-readable detail, without the payload
}

// Reasons found in Reject.Reason. They are short and stable so that
// consumers of reject records can count and route by them.
const (
	ReasonMalformed     = "malformed"              // not JSON or msgpack, broken structure, or a point that is not a map
	ReasonOversize      = "oversize"               // message longer than MaxMessage
	ReasonTooManyPoints = "too_many_points"        // points beyond MaxPoints
	ReasonBadMetric     = "bad_metric"             // metric missing, not a string, empty, too long or with forbidden bytes
	ReasonBadLabel      = "bad_label"              // label not a string, name or value too long or invalid, duplicate name
	ReasonTooManyLabels = "too_many_labels"        // more than MaxLabels labels
	ReasonBadValue      = "bad_value"              // value missing or not a number
	ReasonNonFinite     = "non_finite"             // value NaN or infinite
	ReasonBadTimestamp  = "bad_timestamp"          // ts missing, of a wrong type or unparseable
	ReasonTSOutOfRange  = "timestamp_out_of_range" // ts outside [now-MaxPast, now+MaxFuture]
)
