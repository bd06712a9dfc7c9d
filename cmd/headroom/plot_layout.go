package main

import (
	"fmt"
	"math"
	"strconv"
	"strings"
	"time"

	"github.com/headroom-dev/headroom/forecast"
)

// This file lays the chart of "headroom replay --plot" out: time and
// value ranges, ticks and the labels of values and times.

// plotIncident is one incident's span, from its events.
type plotIncident struct {
	id, rule         string
	opened, resolved int64 // resolved 0: still open at the end
}

// chart is the laid-out picture.
type chart struct {
	c         *plotCollector
	fans      []*plotFan
	incidents []plotIncident
	t0, t1    int64   // time range, ms
	lo, hi    float64 // value range
	yTicks    []float64
	yStep     float64
	xTicks    []timeTick
	every     time.Duration // regular origins drawn, after thinning
	why       string        // which breach origins are drawn
}

// chart lays out what c collected. c must not be collecting any more.
func (c *plotCollector) chart() *chart {
	c.mu.Lock()
	defer c.mu.Unlock()
	ch := &chart{c: c, every: time.Duration(c.every) * time.Millisecond}
	all := make([]*plotFan, 0, len(c.fans)+1)
	for i := range c.fans {
		all = append(all, &c.fans[i])
	}
	if c.waiting {
		all = append(all, &c.pending)
	}
	ch.fans = ch.pickFans(all)
	ch.incidents = incidentsOf(c.events)
	ch.timeRange()
	ch.valueRange()
	ch.xTicks = timeTicks(ch.t0, ch.t1)
	return ch
}

// pickFans chooses the forecasts to draw. When the user left the choice
// to us (no --plot-every) and a long file has more origins than make a
// readable chart, the regular ones are thinned by powers of two, and if
// there are more breach events than maxAutoFans, only the origins where
// incidents opened are drawn, evenly thinned to maxAutoFans.
func (ch *chart) pickFans(all []*plotFan) []*plotFan {
	var regular, breach, opened int
	for _, f := range all {
		regular += b2i(f.regular)
		breach += b2i(f.breach)
		opened += b2i(f.opened)
	}
	k := int64(1)
	keepBreach, keepOpened := true, 1
	if ch.c.auto {
		for regular/int(k) > maxAutoFans && k < 1<<40 {
			k *= 2
		}
		if breach > maxAutoFans {
			keepBreach = false
			keepOpened = max(1, (opened+maxAutoFans-1)/maxAutoFans)
		}
	}
	ch.every *= time.Duration(k)
	ch.why = "those of breach events"
	if !keepBreach {
		ch.why = "those where incidents opened"
		if keepOpened > 1 {
			ch.why = fmt.Sprintf("one in %d of those where incidents opened", keepOpened)
		}
	}
	out := all[:0:0]
	nOpened := 0
	for i, f := range all {
		keep := (f.regular && f.slot%k == 0) || i == len(all)-1
		switch {
		case f.breach && keepBreach:
			keep = true
		case f.opened:
			keep = keep || nOpened%keepOpened == 0
			nOpened++
		}
		if keep {
			out = append(out, f)
		}
	}
	return out
}

func b2i(b bool) int {
	if b {
		return 1
	}
	return 0
}

// incidentsOf pairs each incident's first event with its resolution.
func incidentsOf(events []plotEvent) []plotIncident {
	var out []plotIncident
	idx := map[string]int{} // lookup only; out keeps event order
	for _, e := range events {
		i, ok := idx[e.incident]
		if !ok {
			idx[e.incident] = len(out)
			out = append(out, plotIncident{id: e.incident, rule: e.rule, opened: e.at})
			i = len(out) - 1
		}
		if e.state == string(forecast.Resolved) {
			out[i].resolved = e.at
		}
	}
	return out
}

// timeRange covers the data, the drawn forecasts and the events.
func (ch *chart) timeRange() {
	c := ch.c
	t0, t1 := int64(math.MaxInt64), int64(math.MinInt64)
	if c.obs.n > 0 {
		t0, t1 = c.obs.tMin, c.obs.tMax
	}
	for _, f := range ch.fans {
		t0 = min(t0, f.origin)
		t1 = max(t1, f.origin)
		if n := len(f.points); n > 0 {
			t1 = max(t1, f.points[n-1].t)
		}
	}
	for _, e := range c.events {
		t0, t1 = min(t0, e.at), max(t1, e.at)
	}
	if t0 > t1 {
		t0, t1 = 0, time.Hour.Milliseconds()
	}
	if t1-t0 <= 0 { // one instant, or a range too long for int64
		mid := t0
		t0, t1 = mid-30*time.Minute.Milliseconds(), mid+30*time.Minute.Milliseconds()
	}
	ch.t0, ch.t1 = t0, t1
}

// valueRange covers the data, the thresholds near it and the drawn bands.
func (ch *chart) valueRange() {
	c := ch.c
	lo, hi := math.Inf(1), math.Inf(-1)
	if c.obs.n > 0 {
		lo, hi = pin(c.obs.vMin), pin(c.obs.vMax)
	} else {
		for _, f := range ch.fans {
			for _, p := range f.points {
				lo, hi = min(lo, pin(p.mean)), max(hi, pin(p.mean))
			}
		}
	}
	if lo > hi {
		for _, r := range c.rules {
			lo, hi = min(lo, pin(r.threshold)), max(hi, pin(r.threshold))
		}
	}
	if lo > hi {
		lo, hi = 0, 1
	}
	ref := hi - lo
	reach := thresholdReach * ref
	if ref == 0 {
		// A flat series has no range to measure by: its size serves.
		ref, reach = math.Abs(lo)/10, thresholdReach*math.Abs(lo)
	}
	if !(ref > 0) {
		ref, reach = 1, thresholdReach
	}
	for _, r := range c.rules {
		if t := r.threshold; t >= lo-reach && t <= hi+reach {
			lo, hi = min(lo, t), max(hi, t)
		}
	}
	// A 95 % band of a short or noisy fit can be many times wider than
	// the data; bands widen the axis by at most an eighth of the range
	// of the data and thresholds on each side, and what lies beyond is clipped
	// at the edge, where the reader sees that it was cut.
	span := max(hi-lo, ref) / 8
	bandLo, bandHi := lo-span, hi+span
	for _, f := range ch.fans {
		for _, p := range f.points {
			lo = min(lo, max(bandLo, pin(p.lo95)))
			hi = max(hi, min(bandHi, pin(p.hi95)))
		}
	}
	if hi == lo {
		lo, hi = lo-ref/2, hi+ref/2
	}
	pad := (hi - lo) * 0.03
	lo, hi = lo-pad, hi+pad
	ch.lo, ch.hi, ch.yStep = niceScale(lo, hi)
	if !(ch.hi > ch.lo) || !finite(ch.lo) || !finite(ch.hi) {
		// Too little precision left at this magnitude for a nice scale.
		ch.lo, ch.hi, ch.yStep = lo, hi, 0
		if !(hi > lo) {
			ch.lo, ch.hi = lo-math.Abs(lo)/10-1, hi+math.Abs(hi)/10+1
		}
	}
	ch.yTicks = nil
	if ch.yStep > 0 {
		first := math.Round(ch.lo / ch.yStep)
		for i := 0; i <= 12; i++ {
			v := (first + float64(i)) * ch.yStep
			if v > ch.hi+ch.yStep/1e6 {
				break
			}
			ch.yTicks = append(ch.yTicks, v)
		}
	}
}

// niceScale widens [lo, hi] to multiples of a step of 1, 2 or 5 × 10^k
// (the common practice for axis ticks) giving 5 to 8 ticks. It takes the
// finest step with at most 8 ticks; as consecutive steps differ by up to
// 2.5 times, that can leave 3 or 4, and the axis then grows by a step at
// a time, on the side with less room, up to 5.
func niceScale(lo, hi float64) (axisLo, axisHi, step float64) {
	if !(hi > lo) || !finite(lo) || !finite(hi) {
		return lo, hi, 0
	}
	span := hi - lo
	e := math.Floor(math.Log10(span))
	var n float64
	for k := e + 1; k >= e-2; k-- {
		for _, m := range [...]float64{5, 2, 1} {
			s := m * math.Pow(10, k)
			a, b := math.Floor(lo/s+1e-9), math.Ceil(hi/s-1e-9)
			if b-a <= 7 {
				step, axisLo, axisHi, n = s, a*s, b*s, b-a
			}
		}
	}
	if step == 0 {
		return lo, hi, 0
	}
	for n < 4 {
		if lo-axisLo < axisHi-hi { // less room below than above
			axisLo -= step
		} else {
			axisHi += step
		}
		n++
	}
	return axisLo, axisHi, step
}

// x maps a time to the horizontal coordinate.
func (ch *chart) x(t int64) float64 {
	f := float64(t-ch.t0) / float64(ch.t1-ch.t0)
	return areaLeft + max(-0.01, min(1.01, f))*(areaRight-areaLeft)
}

// y maps a value to the vertical coordinate; values beyond the axis pin
// to its ends. Halves keep the difference finite for extreme values.
func (ch *chart) y(v float64) float64 {
	v = max(ch.lo, min(ch.hi, v))
	f := (v/2 - ch.lo/2) / (ch.hi/2 - ch.lo/2)
	if !finite(f) {
		f = 0.5
	}
	return areaBottom - f*(areaBottom-areaTop)
}

// inTime reports whether t lies on the time axis.
func (ch *chart) inTime(t int64) bool { return t >= ch.t0 && t <= ch.t1 }

// timeTick is a tick on the time axis: its label and, where the date
// changes, a second line.
type timeTick struct {
	t          int64
	label, sub string
}

// timeStep is a tick spacing: a fixed duration, or whole months.
type timeStep struct {
	d      time.Duration
	months int
}

// maxTimeTicks is the most ticks the time axis shows; labels are about
// 70 units wide.
const maxTimeTicks = 11

// pickTimeStep returns the finest step that gives at most maxTimeTicks
// ticks over span ms.
func pickTimeStep(span int64) timeStep {
	timeSteps := [...]timeStep{
		{d: time.Second}, {d: 2 * time.Second}, {d: 5 * time.Second}, {d: 10 * time.Second}, {d: 15 * time.Second}, {d: 30 * time.Second},
		{d: time.Minute}, {d: 2 * time.Minute}, {d: 5 * time.Minute}, {d: 10 * time.Minute}, {d: 15 * time.Minute}, {d: 30 * time.Minute},
		{d: time.Hour}, {d: 2 * time.Hour}, {d: 3 * time.Hour}, {d: 6 * time.Hour}, {d: 12 * time.Hour},
		{d: 24 * time.Hour}, {d: 48 * time.Hour}, {d: 7 * 24 * time.Hour}, {d: 14 * 24 * time.Hour},
		{months: 1}, {months: 2}, {months: 3}, {months: 6}, {months: 12}, {months: 24}, {months: 60}, {months: 120}, {months: 240}, {months: 600}, {months: 1200},
	}
	for _, s := range timeSteps {
		per := s.d.Milliseconds()
		if s.months > 0 {
			per = int64(s.months) * 30 * 24 * time.Hour.Milliseconds()
		}
		if span/per < maxTimeTicks {
			return s
		}
	}
	return timeSteps[len(timeSteps)-1]
}

// timeTicks places ticks on round times of the UTC calendar: multiples of
// the step in the day, days and weeks (Mondays), or the first of months.
func timeTicks(t0, t1 int64) []timeTick {
	s := pickTimeStep(t1 - t0)
	var ts []int64
	switch {
	case s.months > 0:
		start := time.UnixMilli(t0).UTC()
		mi := start.Year()*12 + int(start.Month()) - 1
		mi = (mi + s.months - 1) / s.months * s.months
		for i := 0; i < 4*maxTimeTicks; i++ {
			m := mi + i*s.months
			t := time.Date(m/12, time.Month(m%12+1), 1, 0, 0, 0, 0, time.UTC).UnixMilli()
			if t < t0 {
				continue
			}
			if t > t1 {
				break
			}
			ts = append(ts, t)
		}
	default:
		per := s.d.Milliseconds()
		var off int64
		if s.d >= 7*24*time.Hour {
			off = 4 * 24 * time.Hour.Milliseconds() // 1970-01-05 was a Monday
		}
		first := (floorDiv(t0-off-1, per) + 1) * per // first multiple at or after t0
		for i := int64(0); i < 4*maxTimeTicks; i++ {
			t := first + off + i*per
			if t > t1 {
				break
			}
			ts = append(ts, t)
		}
	}
	out := make([]timeTick, 0, len(ts))
	var prev time.Time
	for i, ms := range ts {
		t := time.UnixMilli(ms).UTC()
		var tk timeTick
		tk.t = ms
		switch {
		case s.months > 0:
			tk.label = t.Format("Jan")
			if s.months >= 12 {
				tk.label = t.Format("2006")
			} else if i == 0 || t.Year() != prev.Year() {
				tk.sub = t.Format("2006")
			}
		case s.d >= 24*time.Hour:
			tk.label = t.Format("Jan 2")
			if i == 0 || t.Year() != prev.Year() {
				tk.sub = t.Format("2006")
			}
		default:
			tk.label = t.Format("15:04")
			if s.d < time.Minute {
				tk.label = t.Format("15:04:05")
			}
			if i == 0 || t.YearDay() != prev.YearDay() || t.Year() != prev.Year() {
				tk.sub = t.Format("Jan 2, 2006")
			}
		}
		prev = t
		out = append(out, tk)
	}
	return out
}

// formatValue renders an axis value with as many decimals as the step
// needs.
func formatValue(v, step float64) string {
	if step > 0 && math.Abs(v) < step/1e6 {
		v = 0
	}
	a := max(math.Abs(v), step)
	if !(step > 0) {
		return strconv.FormatFloat(v, 'g', 4, 64)
	}
	if a < 1e7 && step >= 1e-6 {
		d := max(0, int(-math.Floor(math.Log10(step)+1e-9)))
		return strconv.FormatFloat(v, 'f', d, 64)
	}
	// Enough significant digits to tell neighbouring ticks apart.
	p := int(math.Floor(math.Log10(a))-math.Floor(math.Log10(step)+1e-9)) + 1
	return strconv.FormatFloat(v, 'g', max(2, min(17, p)), 64)
}

// formatThreshold renders a threshold compactly and exactly enough.
func formatThreshold(v float64) string { return strconv.FormatFloat(v, 'g', 6, 64) }

// shortDuration renders a lead time: 45m, 5h40m, 2d3h.
func shortDuration(ms int64) string {
	d := time.Duration(ms) * time.Millisecond
	switch {
	case d < time.Hour:
		return fmt.Sprintf("%dm", d/time.Minute)
	case d < 48*time.Hour:
		h, m := d/time.Hour, (d%time.Hour)/time.Minute
		if m == 0 {
			return fmt.Sprintf("%dh", h)
		}
		return fmt.Sprintf("%dh%02dm", h, m)
	default:
		days, h := d/(24*time.Hour), (d%(24*time.Hour))/time.Hour
		return fmt.Sprintf("%dd%dh", days, h)
	}
}

func clockText(ms int64) string { return time.UnixMilli(ms).UTC().Format("2006-01-02 15:04 UTC") }

// shortID is the first group of an incident id.
func shortID(id string) string {
	if i := strings.IndexByte(id, '-'); i > 0 {
		return id[:i]
	}
	if len(id) > 8 {
		return id[:8]
	}
	return id
}
