package stream

import (
	"encoding/base64"
	"strings"
	"time"
	"unicode/utf8"
)

// ForecastRecord is what headroom publishes when a series' forecast changes.
// Field names are the wire contract (README, "Wire schema").
type ForecastRecord struct {
	Kind    string `json:"kind" msgpack:"kind"` // "forecast"
	Series  string `json:"series" msgpack:"series"`
	Token   string `json:"token" msgpack:"token"`
	At      string `json:"at" msgpack:"at"`
	Engine  string `json:"engine" msgpack:"engine"`
	Horizon string `json:"horizon" msgpack:"horizon"`

	// What explains the forecast.
	Level        float64 `json:"level" msgpack:"level"`
	TrendPerHour float64 `json:"trend_per_hour" msgpack:"trend_per_hour"`
	Since        string  `json:"since,omitempty" msgpack:"since,omitempty"`
	CycleSeconds float64 `json:"cycle_seconds,omitempty" msgpack:"cycle_seconds,omitempty"`
	// A second, longer cycle folded into the seasonal pattern, and the
	// autocorrelation at the first cycle's lag: the evidence for it.
	Cycle2  float64 `json:"second_cycle_seconds,omitempty" msgpack:"second_cycle_seconds,omitempty"`
	ACF     float64 `json:"autocorrelation,omitempty" msgpack:"autocorrelation,omitempty"`
	Support int     `json:"support" msgpack:"support"`
	Sigma   float64 `json:"sigma" msgpack:"sigma"`

	Points []ForecastPoint `json:"points" msgpack:"points"`
}

// ForecastPoint is one step of a ForecastRecord.
type ForecastPoint struct {
	T       string  `json:"t" msgpack:"t"`
	Mean    float64 `json:"mean" msgpack:"mean"`
	Lower80 float64 `json:"lower80" msgpack:"lower80"`
	Upper80 float64 `json:"upper80" msgpack:"upper80"`
	Lower95 float64 `json:"lower95" msgpack:"lower95"`
	Upper95 float64 `json:"upper95" msgpack:"upper95"`
}

// BreachRecord is one step of an incident's lifecycle.
type BreachRecord struct {
	Kind        string  `json:"kind" msgpack:"kind"` // "breach"
	Series      string  `json:"series" msgpack:"series"`
	Token       string  `json:"token" msgpack:"token"`
	Rule        string  `json:"rule" msgpack:"rule"`
	State       string  `json:"state" msgpack:"state"` // opened, updated, resolved
	At          string  `json:"at" msgpack:"at"`
	Incident    string  `json:"incident" msgpack:"incident"`
	ID          string  `json:"id" msgpack:"id"`
	Threshold   float64 `json:"threshold" msgpack:"threshold"`
	Direction   string  `json:"direction" msgpack:"direction"`
	Horizon     string  `json:"horizon" msgpack:"horizon"`
	Probability float64 `json:"probability" msgpack:"probability"`
	ETA         string  `json:"eta,omitempty" msgpack:"eta,omitempty"`
	ETAEarly    string  `json:"eta_early,omitempty" msgpack:"eta_early,omitempty"`
	ETALate     string  `json:"eta_late,omitempty" msgpack:"eta_late,omitempty"`
	Engine      string  `json:"engine" msgpack:"engine"`
	Level       float64 `json:"level" msgpack:"level"`
}

// RejectRecord reports input that was refused, with a size-capped copy of
// the offending payload.
type RejectRecord struct {
	Kind     string `json:"kind" msgpack:"kind"` // "rejected"
	At       string `json:"at" msgpack:"at"`     // wall-clock time of the rejection
	Subject  string `json:"subject,omitempty" msgpack:"subject,omitempty"`
	Reason   string `json:"reason" msgpack:"reason"`
	Detail   string `json:"detail,omitempty" msgpack:"detail,omitempty"`
	Index    int    `json:"index" msgpack:"index"` // point position in the message, -1 for the whole message
	Series   string `json:"series,omitempty" msgpack:"series,omitempty"`
	Payload  string `json:"payload,omitempty" msgpack:"payload,omitempty"`
	Encoding string `json:"payload_encoding,omitempty" msgpack:"payload_encoding,omitempty"` // "utf8" or "base64"
	Size     int    `json:"payload_size" msgpack:"payload_size"`                             // full size of the message in bytes
}

// maxRejectPayload caps the copy of a bad payload in a RejectRecord.
const maxRejectPayload = 1024

// setPayload stores a capped copy of msg, as text when it is valid UTF-8
// and base64 otherwise (msgpack is binary).
func (r *RejectRecord) setPayload(msg []byte) {
	r.Size = len(msg)
	if len(msg) > maxRejectPayload {
		msg = msg[:maxRejectPayload]
	}
	if utf8.Valid(msg) {
		r.Payload, r.Encoding = string(msg), "utf8"
		return
	}
	r.Payload, r.Encoding = base64.StdEncoding.EncodeToString(msg), "base64"
}

// formatMs renders unix milliseconds as RFC3339 in UTC; 0 renders empty.
func formatMs(ms int64) string {
	if ms == 0 {
		return ""
	}
	return time.UnixMilli(ms).UTC().Format(time.RFC3339)
}

// formatDuration renders a duration compactly: 24h, 90m, 1h30m, 45s.
func formatDuration(d time.Duration) string {
	s := d.String()
	if strings.HasSuffix(s, "m0s") {
		s = s[:len(s)-2]
	}
	if strings.HasSuffix(s, "h0m") {
		s = s[:len(s)-2]
	}
	return s
}
