package forecast

import (
	"testing"
	"time"

	"github.com/headroom-dev/headroom/state"
)

func TestAdvance(t *testing.T) {
	type step struct {
		min   int64   // minutes since the start
		prob  float64 //
		eta   int64   // minutes since the start; 0 for none
		want  EventState
		phase state.Phase
	}
	const eta = 600 // the default ETA in minutes
	tests := []struct {
		name  string
		steps []step
	}{
		{"opens after confirm", []step{
			{0, 0.9, eta, "", state.Pending},
			{5, 0.85, eta, "", state.Pending},
			{9, 0.95, eta, "", state.Pending},
			{10, 0.9, eta, Opened, state.Open},
		}},
		{"pending drops", []step{
			{0, 0.9, eta, "", state.Pending},
			{5, 0.79, eta, "", state.Quiet},
			{6, 0.9, eta, "", state.Pending},
			{15, 0.9, eta, "", state.Pending},
			{16, 0.9, eta, Opened, state.Open},
		}},
		{"hysteresis and resolve", []step{
			{0, 0.9, eta, "", state.Pending},
			{10, 0.9, eta, Opened, state.Open},
			{11, 0.6, eta, "", state.Open},      // below open_at, above close_at
			{12, 0.4, eta, "", state.Closing},   //
			{20, 0.55, eta, "", state.Open},     // back above close_at: no event
			{21, 0.3, eta, "", state.Closing},   //
			{30, 0.3, eta, "", state.Closing},   // 9 minutes
			{31, 0.2, 0, Resolved, state.Quiet}, //
			{32, 0.2, 0, "", state.Quiet},
		}},
		{"updates on material change, rate limited", []step{
			{0, 0.85, eta, "", state.Pending},
			{10, 0.85, eta, Opened, state.Open},
			{12, 0.99, eta, "", state.Open},      // material, but within confirm of the last event
			{20, 0.9, eta, "", state.Open},       // 0.05 from the published 0.85
			{21, 0.96, eta, Updated, state.Open}, // 0.11
			{40, 0.96, eta + 50, "", state.Open}, // 50 of 579 remaining: under 10 %
			{41, 0.96, eta + 70, Updated, state.Open},
			{60, 0.96, 0, Updated, state.Open}, // the crossing left the search span
		}},
		{"eta arrived is no news", []step{
			{0, 1, 0, "", state.Pending},
			{10, 1, 10, Opened, state.Open},
			{30, 1, 30, "", state.Open},
			{50, 1, 50, "", state.Open},
		}},
	}
	const start = int64(1_700_000_000_000)
	ms := func(m int64) int64 {
		if m == 0 {
			return 0
		}
		return start + m*60_000
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			r := Rule{Threshold: 1, Direction: Above}
			r.Defaults()
			var inc state.Incident
			ids := 0
			newID := func() [16]byte { ids++; return [16]byte{byte(ids)} }
			var openID [16]byte
			for _, s := range tc.steps {
				at := start + s.min*60_000
				got, ok := Advance(&inc, &r, Projection{Probability: s.prob, ETA: ms(s.eta)}, at, newID)
				if ok != (s.want != "") || got != s.want {
					t.Fatalf("minute %d: event %q %v, want %q", s.min, got, ok, s.want)
				}
				if inc.Phase != s.phase {
					t.Fatalf("minute %d: phase %d, want %d", s.min, inc.Phase, s.phase)
				}
				switch got {
				case Opened:
					openID = inc.ID
					if inc.Opened != at || inc.Emitted != at || inc.Prob != float32(s.prob) {
						t.Errorf("opened incident %+v", inc)
					}
				case Updated, Resolved:
					if inc.ID != openID {
						t.Errorf("%s carries id %x, opened %x", got, inc.ID, openID)
					}
					if inc.Emitted != at || inc.ETA != ms(s.eta) {
						t.Errorf("%s: incident %+v", got, inc)
					}
				}
			}
			if ids > 1 {
				t.Errorf("%d ids drawn", ids)
			}
		})
	}
}

// A new episode after a resolution gets a new id; within ReopenWindow of
// the resolution it needs ReopenHold to open.
func TestAdvanceNewEpisode(t *testing.T) {
	r := Rule{Confirm: time.Minute, Release: time.Minute}
	const minute = int64(60_000)
	tests := []struct {
		name     string
		back     int64 // minute the probability returns after resolving at minute 3
		reopenAt int64 // minute the second incident opens
	}{
		{"after the window", 3 + 121, 3 + 122},
		{"within the window", 3 + 10, 3 + 121}, // just after the window
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			var inc state.Incident
			n := byte(0)
			newID := func() [16]byte { n++; return [16]byte{n} }
			var ids [][16]byte
			var opened []int64
			for m := int64(0); m <= tc.back+150; m++ {
				p := 0.1
				if m < 2 || m >= tc.back {
					p = 0.9
				}
				if st, ok := Advance(&inc, &r, Projection{Probability: p}, m*minute, newID); ok && st == Opened {
					ids = append(ids, inc.ID)
					opened = append(opened, m)
				}
			}
			if len(ids) != 2 || ids[0] == ids[1] {
				t.Fatalf("opened ids %x", ids)
			}
			if opened[1] != tc.reopenAt {
				t.Errorf("reopened at minute %d, want %d", opened[1], tc.reopenAt)
			}
		})
	}
}

func TestAdvanceOddInput(t *testing.T) {
	r := Rule{}
	if _, ok := Advance(nil, &r, Projection{Probability: 1}, 0, nil); ok {
		t.Error("nil incident emitted")
	}
	inc := state.Incident{Phase: 99}
	if _, ok := Advance(&inc, &r, Projection{Probability: 0}, 0, nil); ok || inc.Phase != state.Quiet {
		t.Errorf("unknown phase: %+v", inc)
	}
	inc = state.Incident{Phase: state.Open}
	if _, ok := Advance(&inc, &r, Projection{Probability: nan()}, 0, nil); ok || inc.Phase != state.Closing {
		t.Errorf("NaN probability on an open incident: %+v", inc)
	}
	// A negative Confirm opens at once; a nil newID keeps the zero id.
	r = Rule{Confirm: -1}
	inc = state.Incident{}
	if st, ok := Advance(&inc, &r, Projection{Probability: 1}, 5, nil); !ok || st != Opened {
		t.Errorf("negative confirm: %q %v", st, ok)
	}
}

func TestRuleDefaults(t *testing.T) {
	var r Rule
	r.Defaults()
	want := Rule{OpenAt: 0.8, CloseAt: 0.5, Confirm: 10 * time.Minute, Release: 10 * time.Minute, Horizon: 24 * time.Hour}
	if r.OpenAt != want.OpenAt || r.CloseAt != want.CloseAt || r.Confirm != want.Confirm || r.Release != want.Release || r.Horizon != want.Horizon {
		t.Errorf("defaults %+v", r)
	}
	r = Rule{OpenAt: 0.9, Horizon: time.Hour}
	r.Defaults()
	if r.OpenAt != 0.9 || r.Horizon != time.Hour {
		t.Errorf("defaults overwrote set fields: %+v", r)
	}
}
