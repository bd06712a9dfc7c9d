package forecast

import (
	"math"
	"time"

	"github.com/headroom-dev/headroom/state"
)

// Advance moves the incident of one rule on one series through the alert
// lifecycle, given the projection at event time at (unix ms). It returns the
// event to publish and whether there is one.
//
// The lifecycle has hysteresis in both probability and time:
//
//	Quiet   → Pending  when the probability reaches OpenAt
//	Pending → Open     once it has held continuously for Confirm: Opened
//	Pending → Quiet    as soon as it no longer holds
//	Open    → Closing  when the probability falls below CloseAt
//	Closing → Open     when it climbs back to CloseAt (no event)
//	Closing → Quiet    after Release below CloseAt: Resolved
//
// Within ReopenWindow of a resolution, Pending → Open needs ReopenHold.
//
// While open, Updated is published when the outlook changed materially (the
// probability by 0.1 or more, or the ETA by more than a tenth of the time
// that remained to it) and not more often than once per Confirm. Opened
// takes a fresh incident ID from newID; Resolved carries the same ID.
// Zero fields of r count as their defaults.
func Advance(inc *state.Incident, r *Rule, p Projection, at int64, newID func() [16]byte) (EventState, bool) {
	if inc == nil || r == nil {
		return "", false
	}
	openAt, closeAt := orDefault(r.OpenAt, DefaultOpenAt), orDefault(r.CloseAt, DefaultCloseAt)
	confirm := durOrDefault(r.Confirm, DefaultConfirm).Milliseconds()
	release := durOrDefault(r.Release, DefaultRelease).Milliseconds()
	prob := p.Probability
	if math.IsNaN(prob) {
		prob = 0
	}
	holds := prob >= openAt

	switch inc.Phase {
	case state.Pending:
		if !holds {
			inc.Phase, inc.Since, inc.Threshed = state.Quiet, at, 0
			return "", false
		}
		return confirmOpen(inc, prob, p.ETA, at, reopenHold(inc, at, confirm), newID)

	case state.Open:
		if prob < closeAt {
			inc.Phase, inc.Since = state.Closing, at
			return "", false
		}
		if at-inc.Emitted < confirm || !material(inc, prob, p.ETA, at) {
			return "", false
		}
		record(inc, prob, p.ETA, at)
		return Updated, true

	case state.Closing:
		if prob >= closeAt {
			inc.Phase, inc.Since = state.Open, at
			return "", false
		}
		if at-inc.Since < release {
			return "", false
		}
		inc.Phase, inc.Since, inc.Threshed = state.Quiet, at, 0
		record(inc, prob, p.ETA, at)
		return Resolved, true

	default: // Quiet, or a phase this version does not know: start over.
		inc.Phase = state.Quiet
		if !holds {
			return "", false
		}
		inc.Phase, inc.Since, inc.Threshed = state.Pending, at, at
		return confirmOpen(inc, prob, p.ETA, at, reopenHold(inc, at, confirm), newID)
	}
}

// Within ReopenWindow after an incident resolved, a new one on the same
// rule and series opens only after its projection has held for
// ReopenHold (or Confirm, if longer): an outlook that wavers around the
// threshold would otherwise resolve and reopen again and again. With the
// hold as long as the window, no incident reopens within two hours of its
// predecessor's resolution; one whose projection has held all that while
// opens as the window ends.
const (
	ReopenWindow = 2 * time.Hour
	ReopenHold   = 2 * time.Hour
)

// reopenHold is how long the projection must hold before inc opens at at.
func reopenHold(inc *state.Incident, at, confirm int64) int64 {
	if Recent(inc, at) {
		return max(confirm, ReopenHold.Milliseconds())
	}
	return confirm
}

// Recent reports whether inc, not open now, resolved no more than
// ReopenWindow before at; the caller keeps such an incident rather than
// dropping it, so that the longer hold applies.
func Recent(inc *state.Incident, at int64) bool {
	return inc != nil && inc.ID != [16]byte{} && inc.Emitted != 0 &&
		(inc.Phase == state.Quiet || inc.Phase == state.Pending) &&
		at-inc.Emitted <= ReopenWindow.Milliseconds()
}

// confirmOpen opens a pending incident once its projection has held for
// confirm.
func confirmOpen(inc *state.Incident, prob float64, eta, at, confirm int64, newID func() [16]byte) (EventState, bool) {
	if at-inc.Threshed < confirm {
		return "", false
	}
	if newID != nil {
		inc.ID = newID()
	}
	inc.Phase, inc.Since, inc.Opened = state.Open, at, at
	record(inc, prob, eta, at)
	return Opened, true
}

// material reports whether an open incident's outlook moved enough since
// the last event to be worth an Updated event.
func material(inc *state.Incident, prob float64, eta, at int64) bool {
	if math.Abs(prob-float64(inc.Prob)) >= 0.1 {
		return true
	}
	old := inc.ETA
	if (old == 0) != (eta == 0) {
		return true
	}
	// Measured against the time that remained: an ETA a week out moving by
	// an hour is no news, one an hour out moving by twenty minutes is.
	remaining := max(old-at, eta-at, 0)
	if remaining == 0 {
		return false // both have arrived
	}
	return float64(abs64(eta-old)) > 0.1*float64(remaining)
}

// record keeps what an event carries in the incident.
func record(inc *state.Incident, prob float64, eta, at int64) {
	inc.Emitted, inc.Prob, inc.ETA = at, float32(prob), eta
}

func abs64(x int64) int64 {
	if x < 0 {
		return -x
	}
	return x
}

func orDefault(v, def float64) float64 {
	if v == 0 || math.IsNaN(v) {
		return def
	}
	return v
}

// durOrDefault treats zero as the default and a negative duration as zero.
func durOrDefault(d, def time.Duration) time.Duration {
	if d == 0 {
		return def
	}
	return max(d, 0)
}
