package backtest

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"os"
	"reflect"
	"slices"
	"strconv"
	"strings"
	"testing"
	"time"
)

// rowsFuzzSeeds are CSV files in the forms ReadRows accepts.
func rowsFuzzSeeds() [][]byte {
	return [][]byte{
		[]byte("timestamp,value\n2014-04-01 00:00:00,1\n2014-04-01 00:05:00,2.5\n"),
		[]byte("timestamp,value\r\n2024-05-31T23:59:50Z,0.25\r\n2024-05-31T23:59:50.125+02:00,-3e2\r\n"),
		[]byte("value,host,timestamp\n42,db-1,1396312500\n43,db-1,1396312560.5\n"),
		[]byte("\ufeffTimestamp , Value\n\"2014-04-01 00:00:00\",\" 7 \"\n 1396312500 ,NaN\n"),
		[]byte("timestamp,value\n"),
	}
}

// ReadRows delivers at most one row per line after the header, in
// increasing line order, each on a line that holds something, with a
// timestamp that the forms ParseTime reads give back exactly; an error
// from the callback stops it and comes back as is; and ReadCSV agrees.
// ParseTime is also fed the whole input.
func FuzzReadRows(f *testing.F) {
	for _, s := range rowsFuzzSeeds() {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		// The whole input as one timestamp field, for ParseTime alone.
		if tm, err := ParseTime(string(data)); err == nil {
			rowsFuzzTime(t, tm)
		}
		lines := bytes.Split(data, []byte("\n"))
		var ts []int64
		var vs []float64
		last := 1
		err := ReadRows(bytes.NewReader(data), func(line int, tm int64, v float64) error {
			if line <= last || line > len(lines) {
				t.Fatalf("line %d after line %d, in a file of %d lines", line, last, len(lines))
			}
			if len(bytes.TrimRight(lines[line-1], "\r")) == 0 {
				t.Fatalf("row on line %d, which is blank", line)
			}
			last = line
			rowsFuzzTime(t, tm)
			ts = append(ts, tm)
			vs = append(vs, v)
			return nil
		})
		if len(ts) > len(lines)-1 {
			t.Fatalf("%d rows from %d lines", len(ts), len(lines))
		}
		if err == nil && len(data) == 0 {
			t.Fatal("an empty file has no header, yet no error")
		}

		// A callback error stops reading at once and is returned as is.
		stop := errors.New("stop")
		for k := range min(len(ts), 3) {
			calls := 0
			err := ReadRows(bytes.NewReader(data), func(int, int64, float64) error {
				calls++
				if calls > k {
					return stop
				}
				return nil
			})
			if calls != k+1 || !errors.Is(err, stop) {
				t.Fatalf("stopping at row %d: %d calls, error %v", k, calls, err)
			}
		}

		s, cerr := ReadCSV(bytes.NewReader(data), "fuzz")
		finite := true
		for _, v := range vs {
			finite = finite && fuzzFinite(v)
		}
		if want := err == nil && finite && len(ts) >= 2; want != (cerr == nil) {
			t.Fatalf("ReadCSV error %v; ReadRows error %v, %d rows, finite %v", cerr, err, len(ts), finite)
		}
		if cerr != nil {
			if s != nil || !strings.HasPrefix(cerr.Error(), "backtest: fuzz: ") {
				t.Fatalf("ReadCSV failed with a series, or without naming it: %v", cerr)
			}
			return
		}
		if !slices.Equal(s.T, ts) || !slices.Equal(s.V, vs) || s.Step <= 0 || s.Step%time.Millisecond != 0 {
			t.Fatalf("ReadCSV series %v %v step %v; rows %v %v", s.T, s.V, s.Step, ts, vs)
		}
	})
}

// rowsFuzzTime checks that ts, a timestamp ParseTime returned, reads back
// exactly in each form that can hold it: RFC3339 and date-time within
// years 0 to 9999, and unix seconds when whole.
func rowsFuzzTime(t *testing.T, ts int64) {
	t.Helper()
	var forms []string
	if u := time.UnixMilli(ts).UTC(); u.Year() >= 0 && u.Year() <= 9999 {
		forms = append(forms, u.Format(time.RFC3339Nano))
		if ts%1000 == 0 {
			forms = append(forms, u.Format(time.DateTime))
		}
	}
	if ts%1000 == 0 {
		forms = append(forms, strconv.FormatInt(ts/1000, 10))
	}
	for _, s := range forms {
		if back, err := ParseTime(s); err != nil || back != ts {
			t.Fatalf("timestamp %d written as %q reads back as %d, %v", ts, s, back, err)
		}
	}
}

// suiteFuzzSeeds are the repository's scenario suite and, from each of
// its families, a one-family suite small enough to generate in the fuzz
// body; it also returns that suite, nil when the file is absent (then
// there are only the hand-written seeds).
func suiteFuzzSeeds(tb testing.TB) ([][]byte, *Suite) {
	seeds := [][]byte{
		[]byte(`{"history_days":[1,1],"eval_days":[1,1],"families":[{"name":"flat","kind":"noisy_flat","variants":2,` +
			`"params":{"level":[0.4,0.6],"noise":[0.01,0.02],"outliers":[0,0.01],"margin_sd":[6,8]}}]}`),
		[]byte(`{"description":"two","history_days":[1,1],"eval_days":[1,1],"families":[` +
			`{"name":"c","kind":"counter_reset","params":{"rate":[100,200],"jitter":[0.1,0.2],"reset_at":[0.2,0.6],"margin_days":[1,2]}},` +
			`{"name":"d","kind":"dip_backlog","params":{"level":[50,80],"noise":[1,2],"dip_at":[0.2,0.4],"dip_minutes":[10,30],"burst":[1,2],"decay_minutes":[20,60],"margin":[0.5,1]}}]}`),
	}
	b, err := os.ReadFile("../../testdata/scenarios.json")
	if err != nil {
		return seeds, nil
	}
	seeds = append(seeds, b)
	var s Suite
	if err := json.Unmarshal(b, &s); err != nil {
		tb.Fatalf("testdata/scenarios.json: %v", err)
	}
	for _, fam := range s.Families {
		one := Suite{HistoryDays: [2]int{1, 1}, EvalDays: [2]int{1, 1}, Families: []Family{fam}}
		b, err := json.Marshal(one)
		if err != nil {
			tb.Fatal(err)
		}
		seeds = append(seeds, b)
	}
	return seeds, &s
}

// ReadSuite either fails, returning no suite, or returns one that meets
// its own checks and reads back the same once written out. A small suite
// also generates, without panicking, series of the promised shape, with
// finite values for families whose parameters lie within the ranges of a
// family of the same kind in the repository's suite (outside them the
// generators may divide by zero: see suiteFuzzShipped).
func FuzzReadSuite(f *testing.F) {
	seeds, shipped := suiteFuzzSeeds(f)
	for _, s := range seeds {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		s, err := ReadSuite(bytes.NewReader(data))
		if err != nil {
			if s != nil || !strings.HasPrefix(err.Error(), "backtest: ") {
				t.Fatalf("suite %v with error %v", s != nil, err)
			}
			return
		}
		suiteFuzzValid(t, s)
		b, err := json.Marshal(s)
		if err != nil {
			t.Fatalf("encoding the suite: %v", err)
		}
		back, err := ReadSuite(bytes.NewReader(b))
		if err != nil || !reflect.DeepEqual(back, s) {
			t.Fatalf("suite written back reads as %+v, %v; want %+v", back, err, s)
		}
		if suiteFuzzSmall(s) {
			suiteFuzzGenerate(t, s, shipped)
		}
	})
}

// suiteFuzzValid checks what ReadSuite promises of a suite it returns.
func suiteFuzzValid(t *testing.T, s *Suite) {
	t.Helper()
	for _, d := range [][2]int{s.HistoryDays, s.EvalDays} {
		if d[0] < 1 || d[1] < d[0] || d[1] > maxSuiteDays {
			t.Fatalf("days %v", d)
		}
	}
	if len(s.Families) == 0 {
		t.Fatal("no families")
	}
	names := map[string]bool{}
	for _, f := range s.Families {
		if f.Name == "" || names[f.Name] || f.Variants < 0 {
			t.Fatalf("family %q: empty or repeated name, or %d variants", f.Name, f.Variants)
		}
		names[f.Name] = true
		g, ok := generatorOf(f.Kind)
		if !ok || len(f.Params) != len(g.params) {
			t.Fatalf("family %s: kind %q, %d parameters", f.Name, f.Kind, len(f.Params))
		}
		for _, p := range g.params {
			r, ok := f.Params[p]
			if !ok || !(r[0] <= r[1]) {
				t.Fatalf("family %s: parameter %s: %v", f.Name, p, r)
			}
		}
	}
}

// suiteFuzzSmall reports whether one variant of each family of s is
// cheap to generate (about a millisecond at most): two days, two
// families, and parameters of sane size ("steps" sets a loop count of
// its own).
func suiteFuzzSmall(s *Suite) bool {
	if s.HistoryDays[1]+s.EvalDays[1] > 2 || len(s.Families) > 2 {
		return false
	}
	for _, f := range s.Families {
		for p, r := range f.Params {
			lim := 1e12
			if p == "steps" {
				lim = 1e3
			}
			if math.Abs(r[0]) > lim || math.Abs(r[1]) > lim {
				return false
			}
		}
	}
	return true
}

// suiteFuzzShipped reports whether every parameter range of f lies
// within that of one family of the same kind in the shipped suite. The
// generators promise nothing beyond such ranges: a harmonic of -1, a
// decay_minutes of 0 or a cross_at at the first minute divide by zero.
func suiteFuzzShipped(f *Family, shipped *Suite) bool {
	if shipped == nil {
		return false
	}
	for _, g := range shipped.Families {
		if g.Kind != f.Kind {
			continue
		}
		inside := true
		for p, r := range f.Params {
			q := g.Params[p]
			inside = inside && q[0] <= r[0] && r[1] <= q[1]
		}
		if inside {
			return true
		}
	}
	return false
}

// suiteFuzzGenerate generates one variant of each family and checks the
// shape Generate promises: one point a minute over the drawn days, the
// same for the same seed whatever the other families; and finite values
// within the shipped ranges.
func suiteFuzzGenerate(t *testing.T, s *Suite, shipped *Suite) {
	t.Helper()
	ss := s.Generate(7, 1)
	if len(ss) != len(s.Families) {
		t.Fatalf("%d series from %d families", len(ss), len(s.Families))
	}
	for i, se := range ss {
		f := s.Families[i]
		n := len(se.T)
		if se.Family != f.Name || !strings.HasPrefix(se.Name, f.Name+"/") || se.Step != time.Minute || se.Truth == nil {
			t.Fatalf("series %q of family %q: step %v, truth %v", se.Name, f.Name, se.Step, se.Truth)
		}
		days := n / 1440
		if n%1440 != 0 || days < s.HistoryDays[0]+s.EvalDays[0] || days > s.HistoryDays[1]+s.EvalDays[1] ||
			len(se.V) != n || len(se.Signal) != n {
			t.Fatalf("%s: %d times, %d values, %d signal", se.Name, n, len(se.V), len(se.Signal))
		}
		for j := 1; j < n; j++ {
			if se.T[j]-se.T[j-1] != 60_000 {
				t.Fatalf("%s: step %d ms at %d", se.Name, se.T[j]-se.T[j-1], j)
			}
		}
		if se.EvalFrom <= se.T[0] || se.EvalFrom > se.T[n-1] {
			t.Fatalf("%s: scored from %d, outside %d..%d", se.Name, se.EvalFrom, se.T[0], se.T[n-1])
		}
		if !suiteFuzzShipped(&f, shipped) {
			continue
		}
		for j := range n {
			if !fuzzFinite(se.V[j]) || !fuzzFinite(se.Signal[j]) {
				t.Fatalf("%s: point %d is %v, signal %v", se.Name, j, se.V[j], se.Signal[j])
			}
		}
		if !fuzzFinite(se.Truth.Threshold) || !fuzzFinite(se.Truth.Noise) {
			t.Fatalf("%s: truth %+v", se.Name, *se.Truth)
		}
	}
	// A family's series do not depend on the other families.
	alone := *s
	alone.Families = s.Families[len(s.Families)-1:]
	a, b := ss[len(ss)-1], alone.Generate(7, 1)[0]
	if !slices.Equal(a.T, b.T) || !fuzzSameBits(a.V, b.V) || !fuzzSameBits(a.Signal, b.Signal) || fmt.Sprint(*a.Truth) != fmt.Sprint(*b.Truth) {
		t.Fatalf("%s: generated alone, the family gives other series", a.Name)
	}
}

func fuzzFinite(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }

// fuzzSameBits compares floats bit for bit, so that NaNs compare equal.
func fuzzSameBits(a, b []float64) bool {
	return slices.EqualFunc(a, b, func(x, y float64) bool { return math.Float64bits(x) == math.Float64bits(y) })
}
