package forecast

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"strings"
	"testing"
	"time"
)

// rulesFuzzSeeds are realistic rules files: the one shipped in deploy/
// when it is there, and a few written here.
func rulesFuzzSeeds() [][]byte {
	seeds := [][]byte{
		[]byte(`{"rules":[]}`),
		[]byte(`{"rules":[{"name":"minimal","threshold":-1,"direction":"below"}]}`),
		[]byte(`{"rules":[{"name":"disk-full","match":"disk_used_ratio,mount=/data*","threshold":0.9,"direction":"above","horizon":"24h","open_at":0.8,"close_at":0.5,"confirm":"10m","release":"10m","warmup":"96h","engine":""}]}`),
		[]byte(`{"rules":[{"name":"a","match":"m,host!=\"x,y\"","threshold":5e9,"direction":"Below","horizon":"90m","warmup":"0s","engine":"incline"},` +
			`{"name":"b","threshold":0,"direction":"ABOVE","open_at":1,"close_at":1,"confirm":"1ns","release":"1h0m0.5s","engine":"tide"}]}`),
	}
	if b, err := os.ReadFile("../deploy/rules.json"); err == nil {
		seeds = append(seeds, b)
	}
	return seeds
}

// ParseRules either fails, returning no rules and an error that says
// where, or returns one valid rule per rule in the file, with the
// defaults applied to the fields left out, which reads back the same
// once written in the file's own layout.
func FuzzParseRules(f *testing.F) {
	for _, s := range rulesFuzzSeeds() {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		rules, err := ParseRules(bytes.NewReader(data))
		file, decoded := rulesFuzzDecode(data)
		if err != nil {
			if rules != nil {
				t.Fatalf("error %v with %d rules", err, len(rules))
			}
			if decoded {
				rulesFuzzValidationError(t, file, err)
			} else if !strings.HasPrefix(err.Error(), "forecast: rules: ") {
				t.Fatalf("decoding error %q does not start with \"forecast: rules: \"", err)
			}
			return
		}
		if !decoded {
			t.Fatalf("accepted an input that does not decode as a rules file")
		}
		if rules == nil || len(rules) != len(file.Rules) {
			t.Fatalf("%d rules from a file of %d", len(rules), len(file.Rules))
		}
		names := make(map[string]bool, len(rules))
		for i := range rules {
			rulesFuzzCheck(t, &rules[i], &file.Rules[i])
			if names[rules[i].Name] {
				t.Fatalf("rule %d: name %q repeated", i, rules[i].Name)
			}
			names[rules[i].Name] = true
		}
		rulesFuzzRoundTrip(t, rules)
	})
}

// rulesFuzzDecode decodes data as ParseRules does before validating.
func rulesFuzzDecode(data []byte) (ruleFile, bool) {
	var file ruleFile
	dec := json.NewDecoder(bytes.NewReader(data))
	dec.DisallowUnknownFields()
	if dec.Decode(&file) != nil {
		return file, false
	}
	_, err := dec.Token()
	return file, errors.Is(err, io.EOF)
}

// rulesFuzzValidationError checks that an error about a file that
// decodes names a rule of it and a field, as ParseRules documents.
func rulesFuzzValidationError(t *testing.T, file ruleFile, err error) {
	t.Helper()
	fields := []string{"name", "match", "threshold", "direction", "horizon", "open_at", "close_at", "confirm", "release", "warmup", "engine"}
	msg := err.Error()
	for i := range file.Rules {
		who := fmt.Sprintf("rule %d", i)
		if file.Rules[i].Name != "" {
			who = fmt.Sprintf("rule %q", file.Rules[i].Name)
		}
		for _, field := range fields {
			if strings.HasPrefix(msg, "forecast: "+who+": "+field+":") {
				return
			}
		}
	}
	t.Fatalf("validation error %q names no rule and field", msg)
}

// rulesFuzzCheck checks one parsed rule against its entry in the file.
func rulesFuzzCheck(t *testing.T, r *Rule, j *ruleJSON) {
	t.Helper()
	if r.Name == "" || r.Name != j.Name {
		t.Fatalf("name %q from %q", r.Name, j.Name)
	}
	if j.Threshold == nil || r.Threshold != *j.Threshold || math.IsNaN(r.Threshold) || math.IsInf(r.Threshold, 0) {
		t.Fatalf("%s: threshold %v from %v", r.Name, r.Threshold, j.Threshold)
	}
	if r.Direction != Above && r.Direction != Below || !strings.EqualFold(r.Direction.String(), j.Direction) {
		t.Fatalf("%s: direction %v from %q", r.Name, r.Direction, j.Direction)
	}
	m, err := ParseMatch(j.Match)
	if err != nil || m.String() != r.Match.String() {
		t.Fatalf("%s: selector %q from %q (%v)", r.Name, r.Match.String(), j.Match, err)
	}
	if r.Engine != j.Engine {
		t.Fatalf("%s: engine %q from %q", r.Name, r.Engine, j.Engine)
	}
	if _, ok := Lookup(r.Engine); r.Engine != "" && !ok {
		t.Fatalf("%s: unknown engine %q accepted", r.Name, r.Engine)
	}
	// Fields left out hold the documented defaults; the others are valid.
	durs := []struct {
		field string
		text  string
		got   time.Duration
		def   time.Duration
	}{
		{"horizon", j.Horizon, r.Horizon, DefaultHorizon},
		{"confirm", j.Confirm, r.Confirm, DefaultConfirm},
		{"release", j.Release, r.Release, DefaultRelease},
		{"warmup", j.Warmup, r.Warmup, DefaultWarmup},
	}
	for _, d := range durs {
		if d.text == "" && d.got != d.def {
			t.Fatalf("%s: %s left out is %v, want the default %v", r.Name, d.field, d.got, d.def)
		}
		if d.field == "warmup" && d.got == 0 || d.field != "warmup" && d.got <= 0 {
			t.Fatalf("%s: %s %v from %q", r.Name, d.field, d.got, d.text)
		}
	}
	probs := []struct {
		field string
		in    *float64
		got   float64
		def   float64
	}{
		{"open_at", j.OpenAt, r.OpenAt, DefaultOpenAt},
		{"close_at", j.CloseAt, r.CloseAt, DefaultCloseAt},
	}
	for _, p := range probs {
		if p.in == nil && p.got != p.def || p.in != nil && p.got != *p.in {
			t.Fatalf("%s: %s %v from %v", r.Name, p.field, p.got, p.in)
		}
		if !(p.got > 0 && p.got <= 1) {
			t.Fatalf("%s: %s %v is not a probability in (0, 1]", r.Name, p.field, p.got)
		}
	}
	if r.CloseAt > r.OpenAt {
		t.Fatalf("%s: close_at %v above open_at %v", r.Name, r.CloseAt, r.OpenAt)
	}
	// Defaults has been applied, so applying it again changes nothing.
	again := *r
	again.Defaults()
	if !rulesFuzzSame(r, &again) {
		t.Fatalf("%s: Defaults changes a parsed rule: %+v to %+v", r.Name, *r, again)
	}
}

// rulesFuzzRoundTrip writes rules in the file layout and reads them back.
func rulesFuzzRoundTrip(t *testing.T, rules []Rule) {
	t.Helper()
	file := ruleFile{Rules: make([]ruleJSON, len(rules))}
	for i := range rules {
		r := &rules[i]
		file.Rules[i] = ruleJSON{
			Name: r.Name, Match: r.Match.String(), Threshold: &r.Threshold, Direction: r.Direction.String(),
			Horizon: r.Horizon.String(), OpenAt: &r.OpenAt, CloseAt: &r.CloseAt,
			Confirm: r.Confirm.String(), Release: r.Release.String(), Warmup: r.Warmup.String(), Engine: r.Engine,
		}
	}
	b, err := json.Marshal(file)
	if err != nil {
		t.Fatalf("encoding the rules: %v", err)
	}
	back, err := ParseRules(bytes.NewReader(b))
	if err != nil {
		t.Fatalf("rules written back do not parse: %v\n%s", err, b)
	}
	if len(back) != len(rules) {
		t.Fatalf("%d rules read back as %d", len(rules), len(back))
	}
	for i := range rules {
		if !rulesFuzzSame(&rules[i], &back[i]) {
			t.Fatalf("rule %d: %+v reads back as %+v", i, rules[i], back[i])
		}
	}
}

func rulesFuzzSame(a, b *Rule) bool {
	return a.Name == b.Name && a.Match.String() == b.Match.String() && a.Threshold == b.Threshold &&
		a.Direction == b.Direction && a.Horizon == b.Horizon && a.OpenAt == b.OpenAt && a.CloseAt == b.CloseAt &&
		a.Confirm == b.Confirm && a.Release == b.Release && a.Warmup == b.Warmup && a.Engine == b.Engine
}
