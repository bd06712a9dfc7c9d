package forecast

import (
	"math"
	"strings"
	"testing"
	"time"

	"github.com/headroom-dev/headroom/state"
)

func TestParseRules(t *testing.T) {
	in := `{"rules":[
	  {"name":"disk-full","match":"disk_used_ratio,mount=/data*","threshold":0.9,"direction":"above","horizon":"24h","open_at":0.8,"close_at":0.5,"confirm":"10m","release":"10m","engine":""},
	  {"name":"low-free","match":"","threshold":5e9,"direction":"Below","horizon":"6h","engine":"incline"},
	  {"name":"minimal","threshold":-1,"direction":"below"}
	]}`
	rules, err := ParseRules(strings.NewReader(in))
	if err != nil {
		t.Fatal(err)
	}
	if len(rules) != 3 {
		t.Fatalf("%d rules", len(rules))
	}
	r := rules[0]
	if r.Name != "disk-full" || r.Threshold != 0.9 || r.Direction != Above || r.Horizon != 24*time.Hour ||
		r.OpenAt != 0.8 || r.CloseAt != 0.5 || r.Confirm != 10*time.Minute || r.Release != 10*time.Minute || r.Engine != "" {
		t.Errorf("rule 0: %+v", r)
	}
	if !r.Match.Match("disk_used_ratio", map[string]string{"mount": "/data2"}) || r.Match.Match("disk_used_ratio", map[string]string{"mount": "/"}) {
		t.Errorf("rule 0 selector %q", r.Match.String())
	}
	if r := rules[1]; r.Direction != Below || r.Horizon != 6*time.Hour || r.Engine != "incline" || !r.Match.IsZero() {
		t.Errorf("rule 1: %+v", r)
	}
	if r := rules[2]; r.OpenAt != 0.8 || r.CloseAt != 0.5 || r.Confirm != 10*time.Minute || r.Horizon != 24*time.Hour {
		t.Errorf("rule 2 defaults: %+v", r)
	}

	empty, err := ParseRules(strings.NewReader(`{"rules":[]}`))
	if err != nil || len(empty) != 0 {
		t.Errorf("empty rules: %v, %v", empty, err)
	}
}

func TestParseRulesErrors(t *testing.T) {
	ok := `"name":"r","threshold":1,"direction":"above"`
	tests := []struct{ in, want string }{
		{`{"rules":[{` + ok + `,"colour":"red"}]}`, `unknown field "colour"`},
		{`{"rulez":[]}`, `unknown field "rulez"`},
		{`{"rules":[{` + ok + `}]} {}`, "after the rules"},
		{`{"rules":[{` + ok + `}`, "unexpected EOF"},
		{`{"rules":[{"threshold":1,"direction":"above"}]}`, "rule 0: name: missing"},
		{`{"rules":[{"name":"r","direction":"above"}]}`, `rule "r": threshold: missing`},
		{`{"rules":[{"name":"r","threshold":"1","direction":"above"}]}`, "cannot unmarshal"},
		{`{"rules":[{"name":"r","threshold":1}]}`, `rule "r": direction: missing`},
		{`{"rules":[{"name":"r","threshold":1,"direction":"up"}]}`, `rule "r": direction:`},
		{`{"rules":[{` + ok + `,"horizon":"1 day"}]}`, `rule "r": horizon:`},
		{`{"rules":[{` + ok + `,"horizon":"-1h"}]}`, `rule "r": horizon: -1h is not positive`},
		{`{"rules":[{` + ok + `,"confirm":"0s"}]}`, `rule "r": confirm:`},
		{`{"rules":[{` + ok + `,"release":"x"}]}`, `rule "r": release:`},
		{`{"rules":[{` + ok + `,"open_at":1.5}]}`, `rule "r": open_at:`},
		{`{"rules":[{` + ok + `,"close_at":0}]}`, `rule "r": close_at:`},
		{`{"rules":[{` + ok + `,"open_at":0.4}]}`, `rule "r": close_at: 0.5 is above open_at 0.4`},
		{`{"rules":[{` + ok + `,"engine":"crystal-ball"}]}`, `rule "r": engine: unknown engine`},
		{`{"rules":[{` + ok + `,"match":"a,b"}]}`, `rule "r": match:`},
		{`{"rules":[{` + ok + `},{` + ok + `}]}`, `rule "r": name: used by an earlier rule`},
	}
	for _, tc := range tests {
		_, err := ParseRules(strings.NewReader(tc.in))
		if err == nil {
			t.Errorf("%s: no error", tc.in)
			continue
		}
		if !strings.Contains(err.Error(), tc.want) || !strings.HasPrefix(err.Error(), "forecast: ") {
			t.Errorf("%s:\n got %v\nwant it to mention %q", tc.in, err, tc.want)
		}
	}
}

func TestDirection(t *testing.T) {
	tests := []struct {
		in   string
		want Direction
		err  bool
	}{
		{"above", Above, false},
		{"BELOW", Below, false},
		{"", 0, true},
		{"over", 0, true},
	}
	for _, tc := range tests {
		got, err := ParseDirection(tc.in)
		if (err != nil) != tc.err || got != tc.want {
			t.Errorf("ParseDirection(%q) = %v, %v", tc.in, got, err)
		}
	}
	for _, d := range []Direction{Above, Below} {
		if back, err := ParseDirection(d.String()); err != nil || back != d {
			t.Errorf("%v does not read back", d)
		}
	}
	if s := Direction(3).String(); s != "Direction(3)" {
		t.Errorf("Direction(3).String() = %q", s)
	}
}

func TestEngines(t *testing.T) {
	es := Engines()
	if len(es) != 2 || es[0].Name() != "incline" || es[1].Name() != "tide" {
		t.Fatalf("engines %v", es)
	}
	for _, e := range es {
		if got, ok := Lookup(e.Name()); !ok || got.Name() != e.Name() {
			t.Errorf("Lookup(%q) = %v, %v", e.Name(), got, ok)
		}
	}
	if _, ok := Lookup("nope"); ok {
		t.Error("Lookup of an unknown engine succeeded")
	}
	if _, ok := Lookup(""); ok {
		t.Error("Lookup of the empty name succeeded")
	}
	v := weekView(t)
	for _, tc := range []struct{ override, want string }{{"", "incline"}, {"incline", "incline"}, {"nope", "incline"}, {"tide", "tide"}} {
		if e := Choose(v, nil, nil, tc.override); e == nil || e.Name() != tc.want {
			t.Errorf("Choose(%q) = %v, want %s", tc.override, e, tc.want)
		}
	}
	if e := Choose(nil, nil, nil, ""); e == nil {
		t.Error("Choose(nil) = nil")
	}
}

// Choose on a daily cycle (invented data) picks Tide, caches detection
// per hourly bucket and allocates nothing in steady state.
func TestChooseCycle(t *testing.T) {
	const minutes = 14 * 1440
	s := newSeries(minutes, 0.5, 9, func(i int) float64 { return 10 + 2*math.Sin(2*math.Pi*float64(i)/1440) })
	var v state.View
	s.view(s.end(minutes-1), &v)
	sc := NewScratch()
	var c Cycles
	e := Choose(&v, sc, &c, "")
	td, ok := e.(*Tide)
	if !ok || td.Cycles != c || c.Period != 24*time.Hour || c.At != s.end(minutes-1)/hour*hour {
		t.Fatalf("Choose = %#v, cycles %+v", e, c)
	}
	var f Forecast
	if !e.Fit(&v, sc, &f) || f.Engine != "tide" {
		t.Fatalf("fit %+v", f)
	}
	// A cached detection for this hour is used as it is, even if wrong.
	stale := Cycles{At: c.At}
	if e := Choose(&v, sc, &stale, ""); e.Name() != "incline" || stale.Period != 0 {
		t.Errorf("cached no-cycle: %v, %+v", e, stale)
	}
	// An old one is refreshed.
	old := Cycles{At: c.At - hour}
	if e := Choose(&v, sc, &old, ""); e.Name() != "tide" || old != c {
		t.Errorf("stale cache: %v, %+v", e, old)
	}
	if n := testing.AllocsPerRun(100, func() { Choose(&v, sc, &c, "") }); n != 0 {
		t.Errorf("Choose allocates %v times in steady state", n)
	}
	if n := testing.AllocsPerRun(100, func() { Lookup("tide") }); n != 0 {
		t.Errorf("Lookup allocates %v times", n)
	}
}
