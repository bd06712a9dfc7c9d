package stream_test

import (
	"encoding/json"
	"fmt"
	"math"
	"math/rand/v2"
	"reflect"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/headroom-dev/headroom/forecast"
	"github.com/headroom-dev/headroom/state"
	"github.com/headroom-dev/headroom/stream"
)

// sink collects records in memory.
type sink struct {
	mu        sync.Mutex
	forecasts []stream.ForecastRecord
	breaches  []stream.BreachRecord
	rejects   []stream.RejectRecord
}

func (s *sink) Forecast(r *stream.ForecastRecord) {
	s.mu.Lock()
	s.forecasts = append(s.forecasts, *r)
	s.mu.Unlock()
}

func (s *sink) Breach(r *stream.BreachRecord) {
	s.mu.Lock()
	s.breaches = append(s.breaches, *r)
	s.mu.Unlock()
}

func (s *sink) Reject(r *stream.RejectRecord) {
	s.mu.Lock()
	s.rejects = append(s.rejects, *r)
	s.mu.Unlock()
}

// seqIDs makes deterministic ids so that two runs can be compared.
func seqIDs() func() [16]byte {
	var n uint64
	return func() [16]byte {
		n++
		var id [16]byte
		for i := 0; i < 8; i++ {
			id[15-i] = byte(n >> (8 * i))
		}
		return id
	}
}

func newProc(t *testing.T, s stream.Emitter, rules []forecast.Rule) *stream.Processor {
	t.Helper()
	store, err := state.New(state.Config{Partitions: 4})
	if err != nil {
		t.Fatal(err)
	}
	p, err := stream.NewProcessor(store, s, stream.Config{
		Rules: rules, NewID: seqIDs(),
		Now:    func() time.Time { return time.Date(2026, 11, 21, 0, 0, 0, 0, time.UTC) },
		Limits: stream.Limits{MaxFuture: 48 * time.Hour},
	})
	if err != nil {
		t.Fatal(err)
	}
	return p
}

func volumeRule(t *testing.T) forecast.Rule {
	m, err := forecast.ParseMatch("volume_used_ratio")
	if err != nil {
		t.Fatal(err)
	}
	return forecast.Rule{Name: "volume-full", Match: m, Threshold: 0.9, Direction: forecast.Above, Horizon: 6 * time.Hour, Warmup: -1}
}

// TestSameRecordsWhateverBatching feeds the same points for three series
// one message per point, in 128-point batches, and interleaved differently
// across series: every run must give the same records (event time).
func TestSameRecordsWhateverBatching(t *testing.T) {
	start := time.Date(2026, 11, 20, 0, 0, 0, 0, time.UTC)
	var series [][]wirePoint
	for i, host := range []string{"a", "b", "c"} {
		series = append(series, fill("volume_used_ratio", host, start, 6, 0.5+0.05*float64(i), 0.06, 0, 0, uint64(i+1)))
	}
	run := func(msgs [][]wirePoint) *sink {
		s := &sink{}
		w := newProc(t, s, []forecast.Rule{volumeRule(t)}).NewWorker()
		for _, m := range msgs {
			b, _ := json.Marshal(m)
			w.Handle("headroom.points.t", b)
		}
		return s
	}
	// Round robin across series, one point per message.
	var single [][]wirePoint
	for i := range series[0] {
		for _, s := range series {
			single = append(single, []wirePoint{s[i]})
		}
	}
	// Series after series, 128 points per message.
	var batched [][]wirePoint
	for _, s := range series {
		for i := 0; i < len(s); i += 128 {
			batched = append(batched, s[i:min(i+128, len(s))])
		}
	}
	a, b := run(single), run(batched)
	if len(a.forecasts) == 0 || len(a.breaches) == 0 {
		t.Fatalf("no records: %d forecasts, %d breaches", len(a.forecasts), len(a.breaches))
	}
	// Per series the sequences must match; across series the order differs.
	for _, host := range []string{"a", "b", "c"} {
		fa, fb := filterF(a.forecasts, host), filterF(b.forecasts, host)
		if !reflect.DeepEqual(fa, fb) {
			t.Errorf("series %s: forecast records differ between batchings (%d vs %d)", host, len(fa), len(fb))
		}
		ba, bb := filterB(a.breaches, host), filterB(b.breaches, host)
		for i := range ba {
			ba[i].Incident, ba[i].ID = "", ""
		}
		for i := range bb {
			bb[i].Incident, bb[i].ID = "", ""
		}
		if !reflect.DeepEqual(ba, bb) {
			t.Errorf("series %s: breach events differ between batchings:\n%+v\n%+v", host, ba, bb)
		}
	}
}

func filterF(rs []stream.ForecastRecord, host string) []stream.ForecastRecord {
	return filter(rs, host, func(r stream.ForecastRecord) string { return r.Series })
}

func filterB(rs []stream.BreachRecord, host string) []stream.BreachRecord {
	return filter(rs, host, func(r stream.BreachRecord) string { return r.Series })
}

func filter[R any](rs []R, host string, series func(R) string) []R {
	var out []R
	for _, r := range rs {
		if strings.Contains(series(r), `host="`+host+`"`) {
			out = append(out, r)
		}
	}
	return out
}

func TestRejects(t *testing.T) {
	s := &sink{}
	p := newProc(t, s, nil)
	w := p.NewWorker()
	now := time.Date(2026, 11, 21, 0, 0, 0, 0, time.UTC).UnixMilli()
	msgs := []struct {
		msg    string
		reason string
	}{
		{`{"metric":`, "malformed"},
		{fmt.Sprintf(`{"metric":"m","ts":%d,"value":"x"}`, now), "bad_value"},
		{fmt.Sprintf(`{"metric":"m","ts":%d,"value":1}`, now+100*24*3600*1000), "timestamp_out_of_range"},
		{fmt.Sprintf(`{"metric":"","ts":%d,"value":1}`, now), "bad_metric"},
	}
	for _, m := range msgs {
		s.rejects = nil
		if n := w.Handle("headroom.points.t", []byte(m.msg)); n != 0 {
			t.Errorf("%s: %d points applied", m.msg, n)
		}
		if len(s.rejects) != 1 || s.rejects[0].Reason != m.reason {
			t.Errorf("%s: rejects %+v, want one %s", m.msg, s.rejects, m.reason)
			continue
		}
		if r := s.rejects[0]; r.Payload != m.msg || r.Subject != "headroom.points.t" || r.Size != len(m.msg) {
			t.Errorf("%s: reject record %+v", m.msg, r)
		}
	}
	// A late point is refused by the store; the good points beside it stay.
	s.rejects = nil
	good := fmt.Sprintf(`[{"metric":"m","ts":%d,"value":1},{"metric":"m","ts":%d,"value":2},{"metric":"m","ts":%d,"value":3}]`,
		now, now+10*60*1000, now-60*60*1000)
	if n := w.Handle("headroom.points.t", []byte(good)); n != 2 {
		t.Errorf("applied %d of 3, want 2", n)
	}
	if len(s.rejects) != 1 || s.rejects[0].Reason != "late" {
		t.Errorf("rejects %+v, want one late", s.rejects)
	}
	if st := p.Stats(); st.Points != 2 || st.Rejected != 5 {
		t.Errorf("stats %+v", st)
	}
}

// TestForecastOnlyWhenChanged checks that a flat, noiseless series gets a
// forecast record once and then only when it moves.
func TestForecastOnlyWhenChanged(t *testing.T) {
	s := &sink{}
	w := newProc(t, s, nil).NewWorker()
	start := time.Date(2026, 11, 20, 0, 0, 0, 0, time.UTC)
	add := func(from, to int, v float64) {
		for m := from; m < to; m++ {
			if err := w.Add("flat", nil, start.Add(time.Duration(m)*time.Minute).UnixMilli(), v); err != nil {
				t.Fatal(err)
			}
		}
	}
	add(0, 120, 5)
	n := len(s.forecasts)
	if n == 0 || n > 3 {
		t.Fatalf("%d forecast records for a constant series, want 1 to 3", n)
	}
	add(120, 240, 50)
	if len(s.forecasts) == n {
		t.Fatal("no forecast record after the level changed")
	}
	last := s.forecasts[len(s.forecasts)-1]
	if math.Abs(last.Level-50) > 1 {
		t.Errorf("level %g after two hours at 50", last.Level)
	}
}

// TestRulesBySelector checks that only matching series get incidents.
func TestRulesBySelector(t *testing.T) {
	s := &sink{}
	rule := volumeRule(t)
	m, _ := forecast.ParseMatch("volume_used_ratio,host=keep*")
	rule.Match = m
	w := newProc(t, s, []forecast.Rule{rule}).NewWorker()
	start := time.Date(2026, 11, 20, 0, 0, 0, 0, time.UTC)
	rng := rand.New(rand.NewPCG(1, 2))
	for _, host := range []string{"keep-1", "skip-1"} {
		labels := func() []state.Label {
			return []state.Label{{Name: []byte("host"), Value: []byte(host)}}
		}
		for mnt := 0; mnt < 6*60; mnt++ {
			v := 0.6 + 0.06*float64(mnt)/60 + 0.002*rng.NormFloat64()
			if err := w.Add("volume_used_ratio", labels(), start.Add(time.Duration(mnt)*time.Minute).UnixMilli(), v); err != nil {
				t.Fatal(err)
			}
		}
	}
	if len(s.breaches) == 0 {
		t.Fatal("no breach event for the matching series")
	}
	for _, b := range s.breaches {
		if !strings.Contains(b.Series, "keep-1") {
			t.Errorf("breach for a series the selector excludes: %s", b.Series)
		}
	}
}

// TestRecordsExplainCycles: a queue with a daily cycle (invented scenario
// data, five days at one point a minute) gets forecast records from the
// periodic engine that carry its evidence, and a rule whose threshold lies
// well above the peaks opens nothing, while one below the coming peak
// (after the warm-up) does.
func TestRecordsExplainCycles(t *testing.T) {
	var s sink
	all, _ := forecast.ParseMatch("")
	rules := []forecast.Rule{
		{Name: "high", Match: all, Threshold: 4500, Direction: forecast.Above, Horizon: 24 * time.Hour},
		{Name: "peak", Match: all, Threshold: 3200, Direction: forecast.Above, Horizon: 24 * time.Hour},
	}
	p := newProc(t, &s, rules)
	w := p.NewWorker()
	rng := rand.New(rand.NewPCG(5, 6))
	start := time.Date(2026, 11, 15, 0, 0, 0, 0, time.UTC)
	for m := 0; m < 5*24*60; m++ {
		h := float64(m) / 60
		v := 2000 + 1500*math.Sin(2*math.Pi*h/24) + 60*rng.NormFloat64()
		if err := w.Add("queue_depth", nil, start.Add(time.Duration(m)*time.Minute).UnixMilli(), v); err != nil {
			t.Fatal(err)
		}
	}
	if len(s.forecasts) == 0 {
		t.Fatal("no forecast records")
	}
	last := s.forecasts[len(s.forecasts)-1]
	if last.Engine != "tide" || last.CycleSeconds != 86400 || !(last.ACF > 0.5) || last.Since == "" {
		t.Errorf("last record: engine %q, cycle %v s, autocorrelation %v, since %q", last.Engine, last.CycleSeconds, last.ACF, last.Since)
	}
	opened := map[string]int{}
	for _, b := range s.breaches {
		if b.State == string(forecast.Opened) {
			opened[b.Rule]++
		}
	}
	if opened["high"] != 0 || opened["peak"] == 0 {
		t.Errorf("opened by rule %v, want none for high and some for peak", opened)
	}
}
