package forecast

import (
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"time"
)

// Defaults of a Rule's zero fields.
const (
	DefaultOpenAt  = 0.8
	DefaultCloseAt = 0.5
	DefaultConfirm = 10 * time.Minute
	DefaultRelease = 10 * time.Minute
	DefaultHorizon = 24 * time.Hour
	DefaultWarmup  = 96 * time.Hour
)

// Defaults fills the zero fields of r: OpenAt 0.8, CloseAt 0.5, Confirm and
// Release ten minutes, Horizon 24 hours, Warmup 96 hours.
func (r *Rule) Defaults() {
	if r.OpenAt == 0 {
		r.OpenAt = DefaultOpenAt
	}
	if r.CloseAt == 0 {
		r.CloseAt = DefaultCloseAt
	}
	if r.Confirm == 0 {
		r.Confirm = DefaultConfirm
	}
	if r.Release == 0 {
		r.Release = DefaultRelease
	}
	if r.Horizon == 0 {
		r.Horizon = DefaultHorizon
	}
	if r.Warmup == 0 {
		r.Warmup = DefaultWarmup
	}
}

// ruleFile is the JSON layout of a rules file.
type ruleFile struct {
	Rules []ruleJSON `json:"rules"`
}

type ruleJSON struct {
	Name      string   `json:"name"`
	Match     string   `json:"match"`
	Threshold *float64 `json:"threshold"`
	Direction string   `json:"direction"`
	Horizon   string   `json:"horizon"`
	OpenAt    *float64 `json:"open_at"`
	CloseAt   *float64 `json:"close_at"`
	Confirm   string   `json:"confirm"`
	Release   string   `json:"release"`
	Warmup    string   `json:"warmup"`
	Engine    string   `json:"engine"`
}

// ParseRules reads a rules file:
//
//	{"rules": [{"name": "disk-full", "match": "disk_used_ratio,mount=/data*",
//	  "threshold": 0.9, "direction": "above", "horizon": "24h",
//	  "open_at": 0.8, "close_at": 0.5, "confirm": "10m", "release": "10m",
//	  "warmup": "96h", "engine": ""}]}
//
// name, threshold and direction are required; the other fields default as
// in Rule.Defaults, which has been applied to the rules returned. Durations
// are Go duration strings. Unknown fields are an error, and every
// validation error names the rule and the field.
func ParseRules(r io.Reader) ([]Rule, error) {
	dec := json.NewDecoder(r)
	dec.DisallowUnknownFields()
	var f ruleFile
	if err := dec.Decode(&f); err != nil {
		return nil, fmt.Errorf("forecast: rules: %w", err)
	}
	if _, err := dec.Token(); !errors.Is(err, io.EOF) {
		return nil, errors.New("forecast: rules: unexpected data after the rules object")
	}
	rules := make([]Rule, 0, len(f.Rules))
	seen := make(map[string]bool, len(f.Rules))
	for i := range f.Rules {
		j := &f.Rules[i]
		who := fmt.Sprintf("rule %d", i)
		if j.Name != "" {
			who = fmt.Sprintf("rule %q", j.Name)
		}
		r, err := j.rule()
		if err != nil {
			return nil, fmt.Errorf("forecast: %s: %w", who, err)
		}
		if seen[r.Name] {
			return nil, fmt.Errorf("forecast: %s: name: used by an earlier rule", who)
		}
		seen[r.Name] = true
		rules = append(rules, r)
	}
	return rules, nil
}

// rule converts and validates one rule; errors start with the field name.
func (j *ruleJSON) rule() (Rule, error) {
	var r Rule
	if j.Name == "" {
		return r, errors.New("name: missing")
	}
	r.Name = j.Name
	m, err := parseMatch(j.Match)
	if err != nil {
		return r, fmt.Errorf("match: %w", err)
	}
	r.Match = m
	if j.Threshold == nil {
		return r, errors.New("threshold: missing")
	}
	if math.IsNaN(*j.Threshold) || math.IsInf(*j.Threshold, 0) {
		return r, errors.New("threshold: not a finite number")
	}
	r.Threshold = *j.Threshold
	if j.Direction == "" {
		return r, errors.New("direction: missing (above or below)")
	}
	d, ok := parseDirection(j.Direction)
	if !ok {
		return r, fmt.Errorf("direction: %q: want above or below", j.Direction)
	}
	r.Direction = d
	durs := []struct {
		field string
		text  string
		dst   *time.Duration
	}{
		{"horizon", j.Horizon, &r.Horizon},
		{"confirm", j.Confirm, &r.Confirm},
		{"release", j.Release, &r.Release},
		{"warmup", j.Warmup, &r.Warmup},
	}
	for _, d := range durs {
		if d.text == "" {
			continue
		}
		v, err := time.ParseDuration(d.text)
		if err != nil {
			return r, fmt.Errorf("%s: %w", d.field, err)
		}
		if d.dst == &r.Warmup && v == 0 {
			v = -1 // "0s": no warm-up at all
		}
		if v == 0 || v < 0 && d.dst != &r.Warmup {
			return r, fmt.Errorf("%s: %s is not positive", d.field, d.text)
		}
		if v < -1 {
			return r, fmt.Errorf("%s: %s is negative", d.field, d.text)
		}
		*d.dst = v
	}
	probs := []struct {
		field string
		v     *float64
		dst   *float64
	}{
		{"open_at", j.OpenAt, &r.OpenAt},
		{"close_at", j.CloseAt, &r.CloseAt},
	}
	for _, p := range probs {
		if p.v == nil {
			continue
		}
		if !(*p.v > 0 && *p.v <= 1) {
			return r, fmt.Errorf("%s: %v is not a probability in (0, 1]", p.field, *p.v)
		}
		*p.dst = *p.v
	}
	if j.Engine != "" {
		if _, ok := Lookup(j.Engine); !ok {
			return r, fmt.Errorf("engine: unknown engine %q", j.Engine)
		}
		r.Engine = j.Engine
	}
	r.Defaults()
	if r.CloseAt > r.OpenAt {
		return r, fmt.Errorf("close_at: %v is above open_at %v", r.CloseAt, r.OpenAt)
	}
	return r, nil
}
