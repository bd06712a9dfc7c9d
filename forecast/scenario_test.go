package forecast

import (
	"encoding/binary"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/headroom-dev/headroom/state"
)

// Scenario tests: invented series run through Fit, Project and Advance
// minute by minute, the way the pipeline drives them, with views that grow
// bucket by bucket.

type event struct {
	at    int64
	state EventState
	id    [16]byte
	prob  float64
}

type sim struct {
	s       *series
	rule    Rule
	view    state.View
	sc      *Scratch
	fc      Forecast
	inc     state.Incident
	nextID  uint64
	events  []event
	maxProb float64
	pending int // minutes spent Pending
}

func newSim(s *series, threshold float64, d Direction) *sim {
	r := Rule{Name: "test", Threshold: threshold, Direction: d}
	r.Defaults()
	return &sim{s: s, rule: r, sc: NewScratch()}
}

func (m *sim) newID() [16]byte {
	m.nextID++
	var id [16]byte
	binary.BigEndian.PutUint64(id[8:], m.nextID)
	return id
}

// run evaluates at the close of each minute in [from, to).
func (m *sim) run(t *testing.T, from, to int) {
	t.Helper()
	for i := from; i < to; i++ {
		at := m.s.end(i)
		m.s.view(at, &m.view)
		if !(Incline{}).Fit(&m.view, m.sc, &m.fc) {
			t.Fatalf("minute %d: fit failed", i)
		}
		p := Project(&m.fc, &m.rule)
		m.maxProb = max(m.maxProb, p.Probability)
		if st, ok := Advance(&m.inc, &m.rule, p, at, m.newID); ok {
			m.events = append(m.events, event{at: at, state: st, id: m.inc.ID, prob: p.Probability})
		}
		if m.inc.Phase == state.Pending {
			m.pending++
		}
	}
}

func (m *sim) count(st EventState) int {
	n := 0
	for _, e := range m.events {
		if e.state == st {
			n++
		}
	}
	return n
}

func (m *sim) first(st EventState) (event, bool) {
	for _, e := range m.events {
		if e.state == st {
			return e, true
		}
	}
	return event{}, false
}

// A disk filling at a steady rate with noise: the slope is found within a
// few percent, the ETA within 10 % of the true crossing, and an incident
// opens once (and only once) when the crossing comes within the horizon.
func TestSceneSteadyFill(t *testing.T) {
	now := 7 * 1440         // a week of history
	rate := 0.2 / (72 * 60) // per minute: from 0.70 to 0.90 in 72 h
	cross := now + 72*60    // minute of the true crossing
	s := newSeries(cross+600, 0.01, 1, func(i int) float64 { return 0.7 + rate*float64(i-now) })

	f, ok := s.fitAt(now, Incline{})
	if !ok {
		t.Fatal("fit failed")
	}
	if got := f.Slope * 60 / rate; math.Abs(got-1) > 0.03 {
		t.Errorf("slope = %.4f of the truth, want within 3 %%", got)
	}
	r := Rule{Threshold: 0.9, Direction: Above}
	r.Defaults()
	p := Project(&f, &r)
	want := float64(s.end(cross) - f.Origin)
	if got := float64(p.ETA - f.Origin); math.Abs(got-want) > 0.1*want {
		t.Errorf("ETA in %.1f h, want %.1f h ± 10 %%", got/3.6e6, want/3.6e6)
	}
	if !(p.Early < p.ETA && p.ETA < p.Late) {
		t.Errorf("early %d, eta %d, late %d not in order", p.Early, p.ETA, p.Late)
	}

	m := newSim(s, 0.9, Above)
	m.run(t, now, cross-60)
	if n := m.count(Opened); n != 1 {
		t.Fatalf("%d incidents opened, want 1: %+v", n, m.events)
	}
	if n := m.count(Resolved); n != 0 {
		t.Errorf("%d resolved while still filling", n)
	}
	e, _ := m.first(Opened)
	// The mean reaches the threshold within the 24 h horizon 24 h before the
	// crossing; with the band, the probability reaches 0.8 a little later.
	before := float64(s.end(cross)-e.at) / 3.6e6
	t.Logf("slope %.4f of truth, ETA %.2f h (true %.2f h), opened %.1f h before the crossing", f.Slope*60/rate, float64(p.ETA-f.Origin)/3.6e6, want/3.6e6, before)
	if before > 24 || before < 16 {
		t.Errorf("opened %.1f h before the crossing, want between 16 and 24", before)
	}
}

// A single huge spike, at the newest bucket or anywhere in the history,
// barely moves level or slope, and opens nothing.
func TestSceneSpike(t *testing.T) {
	now := 7 * 1440
	rate := 0.1 / (72 * 60)
	truth := func(i int) float64 { return 0.6 + rate*float64(i-now) }
	base, _ := newSeries(now+200, 0.01, 3, truth).fitAt(now, Incline{})
	tests := []struct {
		name string
		ago  int // minutes before now
	}{
		{"newest", 0},
		{"second newest", 1},
		{"minute buckets", 60},
		{"quarter-hour buckets", 600},
		{"hourly buckets", 3 * 1440},
		{"oldest", now - 10},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			s := newSeries(now+200, 0.01, 3, truth)
			s.v[now-tc.ago] += 5 // 500 noise SDs, far above the threshold
			s.index()
			f, _ := s.fitAt(now, Incline{})
			if d := math.Abs(f.Level - base.Level); d > 0.002 {
				t.Errorf("level moved by %.4f (noise SD 0.01)", d)
			}
			if d := math.Abs(f.Slope/base.Slope - 1); d > 0.01 {
				t.Errorf("slope moved by %.2f %%", 100*d)
			}

			m := newSim(s, 0.9, Above)
			m.run(t, now-tc.ago-1, min(now-tc.ago+60, now+200))
			if n := m.count(Opened); n != 0 {
				t.Errorf("%d incidents opened by a spike: %+v", n, m.events)
			}
		})
	}
}

// A disk at 85 % heading for 90 % in twelve hours is cleaned to 30 %.
// While the new level has fewer than MinSegment buckets the mean stays put
// and the bands widen; after that the level follows the new level, the
// slope is the fill rate again, and the open incident resolves.
func TestSceneCleanup(t *testing.T) {
	C := 7 * 1440 // first minute at the new level
	rate := 0.05 / (12 * 60)
	s := newSeries(C+120, 0.01, 1, func(i int) float64 {
		if i < C {
			return 0.85 + rate*float64(i-C)
		}
		return 0.30 + rate*float64(i-C)
	})
	before, _ := s.fitAt(C-1, Incline{})
	minSeg := Incline{}.params().MinSegment
	for k := 1; k < minSeg; k++ {
		f, _ := s.fitAt(C+k-1, Incline{})
		if d := math.Abs(f.Mean(0) - before.Mean(float64(k)*60)); d > 0.005 {
			t.Errorf("%d buckets at the new level: mean jumped by %.4f", k, d)
		}
		if f.Var(0) < 100*before.Var(0) {
			t.Errorf("%d buckets at the new level: SD %.4f, bands did not widen (before %.4f)", k, math.Sqrt(f.Var(0)), math.Sqrt(before.Var(0)))
		}
	}
	for k := minSeg; k < minSeg+30; k++ {
		f, _ := s.fitAt(C+k-1, Incline{})
		truth := 0.30 + rate*float64(k-1)
		if d := math.Abs(f.Level - truth); d > 0.015 {
			t.Errorf("%d buckets at the new level: level %.4f, want %.4f", k, f.Level, truth)
		}
		if d := math.Abs(f.Slope*60/rate - 1); d > 0.2 {
			t.Errorf("%d buckets at the new level: slope %.2f of the fill rate", k, f.Slope*60/rate)
		}
		if want := s.end(C - 1); f.Since != want {
			t.Errorf("%d buckets at the new level: regime since %d, want %d", k, f.Since, want)
		}
	}

	m := newSim(s, 0.9, Above)
	m.run(t, C-180, C+60)
	op, ok := m.first(Opened)
	if !ok || op.at >= s.end(C-1) {
		t.Fatalf("no incident open before the clean-up: %+v", m.events)
	}
	res, ok := m.first(Resolved)
	if !ok {
		t.Fatalf("incident not resolved after the clean-up: %+v", m.events)
	}
	if res.id != op.id {
		t.Errorf("resolved incident %x, opened %x", res.id, op.id)
	}
	t.Logf("opened %d min before the clean-up, resolved %d min after", (s.end(C-1)-op.at)/minute, (res.at-s.end(C-1))/minute)
	if late := (res.at - s.end(C-1)) / minute; late > int64(minSeg)+10+5 {
		t.Errorf("resolved %d minutes after the clean-up", late)
	}
	if m.inc.Phase != state.Quiet {
		t.Errorf("phase %v after resolution", m.inc.Phase)
	}
}

// Flat noise well below the threshold never gets close.
func TestSceneFlatNoise(t *testing.T) {
	s := newSeries(4*1440, 2, 11, func(int) float64 { return 50 })
	m := newSim(s, 65, Above) // 7.5 noise SDs of a minute bucket
	m.run(t, 2*1440, 4*1440)
	t.Logf("above: max probability %.2g", m.maxProb)
	if len(m.events) != 0 || m.pending != 0 {
		t.Errorf("events %+v, %d minutes pending on flat noise (max probability %.3f)", m.events, m.pending, m.maxProb)
	}
	// The same below.
	m = newSim(s, 35, Below)
	m.run(t, 2*1440, 4*1440)
	if len(m.events) != 0 || m.pending != 0 {
		t.Errorf("below: events %+v, %d minutes pending (max probability %.3f)", m.events, m.pending, m.maxProb)
	}
}

// Steps with short ramps between them: no ramp is extrapolated into a
// breach of a threshold above the top step.
func TestSceneSteps(t *testing.T) {
	levels := []float64{40, 55, 45, 60, 50, 60}
	const stepLen = 12 * 60
	for _, ramp := range []int{3, 8, 15, 30} {
		truth := func(i int) float64 {
			k, off := i/stepLen, i%stepLen
			if k > 0 && off < ramp {
				return levels[k-1] + (levels[k]-levels[k-1])*float64(off)/float64(ramp)
			}
			return levels[k]
		}
		s := newSeries(len(levels)*stepLen, 1, 7, truth)
		m := newSim(s, 70, Above)
		m.run(t, stepLen, len(levels)*stepLen)
		t.Logf("ramp %d min: max probability %.4f", ramp, m.maxProb)
		if len(m.events) != 0 || m.pending > 0 {
			t.Errorf("ramp %d min: events %+v, %d minutes pending (max probability %.3f)", ramp, m.events, m.pending, m.maxProb)
		}
	}
}

// Stationary noise with serial correlation (AR(1), lag-one correlation
// rho, marginal SD 1) wanders in runs that look like trends for a while;
// neither they nor the changepoints they suggest open an incident on a
// threshold six marginal SDs away.
func TestSceneCorrelatedNoise(t *testing.T) {
	const minutes = 4 * 1440
	for _, rho := range []float64{0.5, 0.9} {
		for seed := uint64(5); seed < 7; seed++ {
			rng := rand.New(rand.NewPCG(seed, 5))
			noise := make([]float64, minutes)
			e := 0.0
			for i := range noise {
				e = rho*e + math.Sqrt(1-rho*rho)*rng.NormFloat64()
				noise[i] = e
			}
			s := newSeries(minutes, 0, 1, func(i int) float64 { return 50 + noise[i] })
			m := newSim(s, 56, Above)
			m.run(t, 2*1440, minutes)
			t.Logf("rho %.1f seed %d: max probability %.3f, %d minutes pending", rho, seed, m.maxProb, m.pending)
			if n := m.count(Opened); n != 0 {
				t.Errorf("rho %.1f seed %d: %d incidents opened", rho, seed, n)
			}
		}
	}
}
