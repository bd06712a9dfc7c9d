package backtest

import (
	"math"
	"slices"
	"strings"
	"testing"

	"github.com/headroom-dev/headroom/forecast"
)

func loadTestSuite(t *testing.T) *Suite {
	t.Helper()
	s, err := LoadSuite("../../testdata/scenarios.json")
	if err != nil {
		t.Fatal(err)
	}
	return s
}

func TestGenerateDeterministic(t *testing.T) {
	s := loadTestSuite(t)
	a, b := s.Generate(7, 2), s.Generate(7, 2)
	c := s.Generate(8, 2)
	if len(a) != 2*len(s.Families) {
		t.Fatalf("%d series, want %d", len(a), 2*len(s.Families))
	}
	differ := false
	for i := range a {
		if a[i].Name != b[i].Name || !slices.Equal(a[i].V, b[i].V) || !slices.Equal(a[i].T, b[i].T) || *a[i].Truth != *b[i].Truth {
			t.Errorf("%s: differs between two runs with the same seed", a[i].Name)
		}
		if !slices.Equal(a[i].V, c[i].V) {
			differ = true
		}
	}
	if !differ {
		t.Error("seeds 7 and 8 give the same series")
	}
	// A family's series do not depend on the number of variants drawn.
	d := s.Generate(7, 3)
	if !slices.Equal(a[0].V, d[0].V) {
		t.Error("variant 0 changed with the variant count")
	}
}

// The truth agrees with the noise-free signal it was made from.
func TestTruthConsistent(t *testing.T) {
	s := loadTestSuite(t)
	for _, se := range s.Generate(3, 6) {
		tr := se.Truth
		n := len(se.T)
		if len(se.V) != n || len(se.Signal) != n || n < 7*1440 || n > 10*1440 {
			t.Fatalf("%s: %d points, %d values, %d signal", se.Name, n, len(se.V), len(se.Signal))
		}
		if se.EvalFrom <= se.T[0] || se.EvalFrom >= se.T[n-1] {
			t.Errorf("%s: scored from %d outside the series", se.Name, se.EvalFrom)
		}
		got := firstCrossing(se, tr.Threshold, tr.Direction)
		switch {
		case tr.Crossing == 0 && got != 0:
			t.Errorf("%s: truth says no crossing, signal crosses at %d", se.Name, got)
		case tr.Crossing != 0 && (got < tr.Crossing || got-tr.Crossing >= 60_000):
			// A crossing between samples is seen at the next minute.
			t.Errorf("%s: crossing %d, signal first at or above at %d", se.Name, tr.Crossing, got)
		}
		if tr.Incident != (tr.Crossing != 0) {
			t.Errorf("%s: incident %v but crossing %d", se.Name, tr.Incident, tr.Crossing)
		}
		if tr.Crossing != 0 && (tr.Crossing < se.EvalFrom || tr.Crossing > se.T[n-1]) {
			t.Errorf("%s: crossing outside the scored days", se.Name)
		}
		if tr.Change != 0 && tr.ChangeSize == 0 {
			t.Errorf("%s: change without a size", se.Name)
		}
		switch se.Family {
		case "steady-fill":
			// The steady fill meets the threshold at the crossing time.
			i := int((tr.Crossing - se.T[0]) / 60_000)
			slope := se.Signal[1] - se.Signal[0]
			if math.Abs(se.Signal[i]-tr.Threshold) > slope {
				t.Errorf("%s: signal %v at the crossing, threshold %v", se.Name, se.Signal[i], tr.Threshold)
			}
		case "fill-cleanup", "steps", "spike", "dip-backlog", "noisy-flat", "daily-cycle", "anomalous-day", "counter-reset":
			if tr.Incident {
				t.Errorf("%s: a no-crossing family with an incident", se.Name)
			}
		}
		if tr.Direction != forecast.Above || !tr.HasRule {
			t.Errorf("%s: rule %v %v", se.Name, tr.HasRule, tr.Direction)
		}
		for i, v := range se.V {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				t.Fatalf("%s: value %d is %v", se.Name, i, v)
			}
		}
	}
}

func TestReadSuiteErrors(t *testing.T) {
	for _, c := range []struct{ name, in, want string }{
		{"not json", "{", "scenario suite"},
		{"unknown field", `{"history_days":[6,7],"eval_days":[1,2],"families":[],"x":1}`, "unknown field"},
		{"no families", `{"history_days":[6,7],"eval_days":[1,2],"families":[]}`, "no families"},
		{"bad days", `{"history_days":[0,7],"eval_days":[1,2],"families":[]}`, "history_days"},
		{"unknown kind", `{"history_days":[6,7],"eval_days":[1,2],"families":[{"name":"a","kind":"wave"}]}`, "unknown kind"},
		{"missing param", `{"history_days":[6,7],"eval_days":[1,2],"families":[{"name":"a","kind":"noisy_flat","params":{"level":[0,1]}}]}`, "missing"},
		{"reversed range", `{"history_days":[6,7],"eval_days":[1,2],"families":[{"name":"a","kind":"noisy_flat","params":{"level":[1,0],"noise":[0,1],"outliers":[0,0],"margin_sd":[6,7]}}]}`, "range"},
		{"extra param", `{"history_days":[6,7],"eval_days":[1,2],"families":[{"name":"a","kind":"noisy_flat","params":{"level":[0,1],"noise":[0,1],"outliers":[0,0],"margin_sd":[6,7],"tilt":[0,1]}}]}`, "unknown parameter"},
		{"too many days", `{"history_days":[6,400],"eval_days":[1,2],"families":[]}`, "history_days"},
		{"outliers beyond 1", `{"history_days":[6,7],"eval_days":[1,2],"families":[{"name":"a","kind":"noisy_flat","params":{"level":[0,1],"noise":[0,1],"outliers":[0,2],"margin_sd":[6,7]}}]}`, "outside"},
		{"infinite level", `{"history_days":[6,7],"eval_days":[1,2],"families":[{"name":"a","kind":"noisy_flat","params":{"level":[0,1e300],"noise":[0,1],"outliers":[0,0],"margin_sd":[6,7]}}]}`, "outside"},
		{"negative harmonic", `{"history_days":[6,7],"eval_days":[1,2],"families":[{"name":"a","kind":"daily_cycle","params":{"level":[1,2],"noise":[0,1],"outliers":[0,0],"amplitude":[0,1],"harmonic":[-1,0],"margin":[0,1]}}]}`, "outside"},
		{"endless steps", `{"history_days":[6,7],"eval_days":[1,2],"families":[{"name":"a","kind":"steps","params":{"level":[1,2],"noise":[0,1],"outliers":[0,0],"steps":[3,1e300],"step":[0,1],"ramp_minutes":[5,6],"change_at":[0.1,0.2],"margin_steps":[1,2]}}]}`, "outside"},
		{"too many variants", `{"history_days":[6,7],"eval_days":[1,2],"families":[{"name":"a","kind":"noisy_flat","variants":1000000,"params":{"level":[0,1],"noise":[0,1],"outliers":[0,0],"margin_sd":[6,7]}}]}`, "variants"},
	} {
		_, err := ReadSuite(strings.NewReader(c.in))
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: error %v, want one containing %q", c.name, err, c.want)
		}
	}
}
