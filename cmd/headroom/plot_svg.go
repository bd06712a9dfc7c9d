package main

import (
	"bufio"
	"cmp"
	"encoding/xml"
	"fmt"
	"io"
	"math"
	"slices"
	"strconv"
	"strings"
	"time"
	"unicode/utf8"

	"github.com/headroom-dev/headroom/forecast"
)

// This file writes the chart of "headroom replay --plot" as SVG.

// Colours: plain and distinguishable in print; markers differ by shape too.
const (
	colObserved = "#1a1a1a"
	colMean     = "#1f4e8c"
	colBand     = "#4a7ab8"
	colThresh   = "#a8322d"
	colIncident = "#d9534f"
	colOpened   = "#c0392b"
	colUpdated  = "#d68910"
	colResolved = "#1e8449"
	colCross    = "#6c3483"
	colGrid     = "#e4e4e4"
	colText     = "#333333"
)

// svgOut writes SVG text, remembering the first error through bufio.
type svgOut struct {
	w   *bufio.Writer
	buf []byte
}

func (s *svgOut) str(parts ...string) {
	for _, p := range parts {
		s.w.WriteString(p)
	}
}

// num writes a coordinate with one decimal; a value that is not finite
// (which the layout never produces) writes 0 rather than break the file.
func (s *svgOut) num(x float64) {
	if !finite(x) {
		x = 0
	}
	if math.Abs(x) < 0.05 {
		x = 0
	}
	s.buf = strconv.AppendFloat(s.buf[:0], x, 'f', 1, 64)
	s.w.Write(s.buf)
}

// attr writes name="x" with x a coordinate.
func (s *svgOut) attr(name string, x float64) {
	s.str(" ", name, `="`)
	s.num(x)
	s.str(`"`)
}

// pt writes "x,y ".
func (s *svgOut) pt(x, y float64) {
	s.num(x)
	s.str(",")
	s.num(y)
	s.str(" ")
}

// text writes escaped character data.
func (s *svgOut) text(t string) {
	_ = xml.EscapeText(s.w, []byte(t))
}

// label writes a <text> element.
func (s *svgOut) label(x, y float64, extra, t string) {
	s.str("<text")
	s.attr("x", x)
	s.attr("y", y)
	s.str(extra, ">")
	s.text(t)
	s.str("</text>\n")
}

// writeSVG draws the chart.
func (ch *chart) writeSVG(w io.Writer) error {
	bw := bufio.NewWriterSize(w, 1<<16)
	s := &svgOut{w: bw}
	s.str(`<?xml version="1.0" encoding="UTF-8"?>`+"\n",
		`<svg xmlns="http://www.w3.org/2000/svg" width="`, strconv.Itoa(svgWidth), `" height="`, strconv.Itoa(svgHeight),
		`" viewBox="0 0 `, strconv.Itoa(svgWidth), " ", strconv.Itoa(svgHeight), `" font-family="DejaVu Sans, Arial, Helvetica, sans-serif" font-size="11" fill="`, colText, `">`+"\n")
	s.str("<title>")
	s.text(ch.titleText())
	s.str("</title>\n")
	s.str(`<defs><clipPath id="area"><rect`)
	s.attr("x", areaLeft)
	s.attr("y", areaTop)
	s.attr("width", areaRight-areaLeft)
	s.attr("height", areaBottom-areaTop)
	s.str("/></clipPath></defs>\n")
	s.str(`<rect width="100%" height="100%" fill="#ffffff"/>` + "\n")
	ch.header(s)
	ch.grid(s)
	s.str(`<g clip-path="url(#area)">` + "\n")
	ch.incidentBands(s)
	ch.drawFans(s)
	ch.observed(s)
	ch.thresholds(s)
	ch.crossings(s)
	ch.eventMarkers(s)
	s.str("</g>\n")
	ch.thresholdLabels(s)
	ch.axes(s)
	s.str("</svg>\n")
	return bw.Flush()
}

func (ch *chart) titleText() string {
	c := ch.c
	var b strings.Builder
	b.WriteString(c.file)
	if len(c.engines) > 0 {
		b.WriteString(" · engine ")
		b.WriteString(strings.Join(c.engines, ", "))
	}
	if len(c.rules) > 0 {
		b.WriteString(" · rule")
		if len(c.rules) > 1 {
			b.WriteString("s")
		}
		for i, r := range c.rules {
			if i > 0 {
				b.WriteString(",")
			}
			dir := "above"
			if r.below {
				dir = "below"
			}
			fmt.Fprintf(&b, " %s (%s %s)", r.name, dir, formatThreshold(r.threshold))
		}
	}
	return b.String()
}

// header draws the title, a summary line and the legend.
func (ch *chart) header(s *svgOut) {
	c := ch.c
	s.label(areaLeft, 24, ` font-size="15" font-weight="bold"`, ch.titleText())
	var b strings.Builder
	fmt.Fprintf(&b, "%s · %s, %d drawn (the first every %s, %s, the last) · %s, %s",
		plural(c.obs.n, "point"), plural(c.records, "forecast record"), len(ch.fans), formatEvery(ch.every), ch.why, plural(len(c.events), "breach event"), plural(len(ch.incidents), "incident"))
	if c.obs.n == 0 {
		b.WriteString(" · no data")
		s.label((areaLeft+areaRight)/2, (areaTop+areaBottom)/2, ` text-anchor="middle" font-size="16" fill="#888888"`, "no data")
	}
	s.label(areaLeft, 43, ` fill="#555555"`, b.String())

	// Legend: a swatch and a word per item, in one row.
	x, y := areaLeft, 68.0
	item := func(word string, draw func(x, y float64)) {
		draw(x, y)
		s.label(x+24, y+4, "", word)
		x += 30 + 6.2*float64(len(word)) + 16
	}
	line := func(col, width, dash string) func(x, y float64) {
		return func(x, y float64) {
			s.str(`<line`)
			s.attr("x1", x)
			s.attr("y1", y)
			s.attr("x2", x+18)
			s.attr("y2", y)
			s.str(` stroke="`, col, `" stroke-width="`, width, `"`, dash, "/>\n")
		}
	}
	box := func(col, opacity string) func(x, y float64) {
		return func(x, y float64) {
			s.str(`<rect`)
			s.attr("x", x)
			s.attr("y", y-5)
			s.str(` width="18" height="10" fill="`, col, `" fill-opacity="`, opacity, `"/>`+"\n")
		}
	}
	item("observed", line(colObserved, "1", ""))
	item("forecast mean", line(colMean, "1.5", ""))
	item("80 % band", box(colBand, "0.28"))
	item("95 % band", box(colBand, "0.11"))
	item("threshold", line(colThresh, "1.2", ` stroke-dasharray="5 3"`))
	item("incident", box(colIncident, "0.55"))
	item("opened", func(x, y float64) { marker(s, "opened", x+9, y) })
	item("updated", func(x, y float64) { marker(s, "updated", x+9, y) })
	item("resolved", func(x, y float64) { marker(s, "resolved", x+9, y) })
	item("eta", func(x, y float64) { etaTick(s, x+9, y, colOpened) })
	item("data crosses", func(x, y float64) { diamond(s, x+9, y) })
}

func plural(n int, what string) string {
	if n == 1 {
		return "1 " + what
	}
	return strconv.Itoa(n) + " " + what + "s"
}

func formatEvery(d time.Duration) string {
	if d%(24*time.Hour) == 0 {
		return fmt.Sprintf("%dd", d/(24*time.Hour))
	}
	str := d.String()
	str = strings.TrimSuffix(str, "0s")
	str = strings.TrimSuffix(str, "0m")
	return str
}

// grid draws the light grid lines behind everything.
func (ch *chart) grid(s *svgOut) {
	s.str(`<g stroke="`, colGrid, `" stroke-width="1">`+"\n")
	for _, v := range ch.yTicks {
		y := ch.y(v)
		s.str("<line")
		s.attr("x1", areaLeft)
		s.attr("y1", y)
		s.attr("x2", areaRight)
		s.attr("y2", y)
		s.str("/>\n")
	}
	for _, tk := range ch.xTicks {
		x := ch.x(tk.t)
		s.str("<line")
		s.attr("x1", x)
		s.attr("y1", areaTop)
		s.attr("x2", x)
		s.attr("y2", areaBottom)
		s.str("/>\n")
	}
	s.str("</g>\n")
}

// incidentBands shades each incident from its opening to its resolution,
// or to the end of the chart.
func (ch *chart) incidentBands(s *svgOut) {
	for _, in := range ch.incidents {
		x0 := ch.x(in.opened)
		x1 := areaRight
		end := "still open at the end"
		if in.resolved != 0 {
			x1 = ch.x(in.resolved)
			end = "resolved " + clockText(in.resolved)
		}
		s.str(`<rect class="incident"`)
		s.attr("x", x0)
		s.attr("y", areaTop)
		s.attr("width", max(x1-x0, 1))
		s.attr("height", areaBottom-areaTop)
		s.str(` fill="`, colIncident, `" fill-opacity="0.10"/>`+"\n")
		// The same span as a bar in the rule's event lane, which the
		// forecast bands cannot hide.
		s.str(`<rect class="incident-bar"`)
		s.attr("x", x0)
		s.attr("y", ch.laneY(in.rule)-3)
		s.attr("width", max(x1-x0, 1))
		s.str(` height="6" fill="`, colIncident, `" fill-opacity="0.55"><title>`)
		s.text(fmt.Sprintf("incident %s (%s): opened %s, %s", shortID(in.id), in.rule, clockText(in.opened), end))
		s.str("</title></rect>\n")
	}
}

// laneY is the height of a rule's event lane, along the top of the plot.
func (ch *chart) laneY(rule string) float64 {
	lane := 0
	for i, r := range ch.c.rules {
		if r.name == rule {
			lane = i
			break
		}
	}
	return areaTop + 10 + 14*float64(lane)
}

// drawFans draws, for each drawn origin, the 95 % and 80 % bands and the
// mean.
func (ch *chart) drawFans(s *svgOut) {
	for _, f := range ch.fans {
		if len(f.points) == 0 {
			continue
		}
		s.str(`<g class="fan"><title>`)
		why := "forecast"
		if f.breach {
			why = "forecast of a breach event"
		}
		s.text(fmt.Sprintf("%s from %s (%s)", why, clockText(f.origin), f.engine))
		s.str("</title>\n")
		band := func(class, opacity string, lo, hi func(p *fanPoint) float64) {
			s.str(`<polygon class="`, class, `" fill="`, colBand, `" fill-opacity="`, opacity, `" points="`)
			for i := range f.points {
				p := &f.points[i]
				s.pt(ch.x(p.t), ch.y(hi(p)))
			}
			for i := len(f.points) - 1; i >= 0; i-- {
				p := &f.points[i]
				s.pt(ch.x(p.t), ch.y(lo(p)))
			}
			s.str(`"/>` + "\n")
		}
		band("band95", "0.11", func(p *fanPoint) float64 { return p.lo95 }, func(p *fanPoint) float64 { return p.hi95 })
		band("band80", "0.17", func(p *fanPoint) float64 { return p.lo80 }, func(p *fanPoint) float64 { return p.hi80 })
		if len(f.points) == 1 {
			p := f.points[0]
			s.str(`<circle class="mean" r="2"`)
			s.attr("cx", ch.x(p.t))
			s.attr("cy", ch.y(p.mean))
			s.str(` fill="`, colMean, `"/>`+"\n")
		} else {
			s.str(`<polyline class="mean" fill="none" stroke="`, colMean, `" stroke-width="1.5" points="`)
			for _, p := range f.points {
				s.pt(ch.x(p.t), ch.y(p.mean))
			}
			s.str(`"/>` + "\n")
		}
		s.str("</g>\n")
	}
}

// observed draws the series as one polyline, decimated to the minimum and
// maximum of each pixel column so that spikes stay visible.
func (ch *chart) observed(s *svgOut) {
	o := &ch.c.obs
	if o.n == 0 {
		return
	}
	cols := int(areaRight - areaLeft)
	type col struct {
		set        bool
		minT, maxT int64
		minV, maxV float64
	}
	cs := make([]col, cols+1)
	put := func(t int64, v float64) {
		i := int(ch.x(t) - areaLeft)
		i = max(0, min(cols, i))
		c := &cs[i]
		if !c.set || v < c.minV {
			c.minT, c.minV = t, v
		}
		if !c.set || v > c.maxV {
			c.maxT, c.maxV = t, v
		}
		c.set = true
	}
	for i := range o.b {
		b := &o.b[i]
		if b.n == 0 {
			continue
		}
		if b.minT <= b.maxT {
			put(b.minT, b.minV)
			put(b.maxT, b.maxV)
		} else {
			put(b.maxT, b.maxV)
			put(b.minT, b.minV)
		}
	}
	s.str(`<polyline class="observed" fill="none" stroke="`, colObserved, `" stroke-width="0.9" stroke-linejoin="round" points="`)
	n := 0
	for i := range cs {
		c := &cs[i]
		if !c.set {
			continue
		}
		first, second := plotPoint{c.minT, c.minV}, plotPoint{c.maxT, c.maxV}
		if c.maxT < c.minT {
			first, second = second, first
		}
		s.pt(ch.x(first.t), ch.y(first.v))
		n++
		if second != first {
			s.pt(ch.x(second.t), ch.y(second.v))
			n++
		}
	}
	if n == 1 {
		// A polyline of one vertex draws nothing: repeat it as a dot.
		c := cs[slices.IndexFunc(cs, func(c col) bool { return c.set })]
		s.pt(ch.x(c.minT)+1, ch.y(c.minV))
	}
	s.str(`"/>` + "\n")
	if o.n <= sparsePoints {
		// Few points: show each, as a line between them hides where they are.
		for i := range o.b {
			if b := &o.b[i]; b.n > 0 {
				dot(s, ch.x(b.minT), ch.y(b.minV))
				if b.maxT != b.minT {
					dot(s, ch.x(b.maxT), ch.y(b.maxV))
				}
			}
		}
	}
}

// sparsePoints is the most observed points drawn one by one as dots.
const sparsePoints = 60

func dot(s *svgOut, x, y float64) {
	s.str(`<circle class="point" r="2" fill="`, colObserved, `"`)
	s.attr("cx", x)
	s.attr("cy", y)
	s.str("/>\n")
}

// thresholdY returns where a threshold is drawn, and whether it is on the
// axis.
func (ch *chart) thresholdY(v float64) (float64, bool) {
	return ch.y(v), v >= ch.lo && v <= ch.hi
}

// thresholds draws each rule's threshold as a dashed line.
func (ch *chart) thresholds(s *svgOut) {
	for _, r := range ch.c.rules {
		y, ok := ch.thresholdY(r.threshold)
		if !ok {
			continue
		}
		s.str(`<line class="threshold"`)
		s.attr("x1", areaLeft)
		s.attr("y1", y)
		s.attr("x2", areaRight)
		s.attr("y2", y)
		s.str(` stroke="`, colThresh, `" stroke-width="1.2" stroke-dasharray="6 4"><title>`)
		s.text(fmt.Sprintf("%s: threshold %s", r.name, formatThreshold(r.threshold)))
		s.str("</title></line>\n")
	}
}

// thresholdLabels names each threshold in the right margin; labels too
// close to each other are pushed apart, and a threshold off the axis is
// named at the edge it lies beyond.
func (ch *chart) thresholdLabels(s *svgOut) {
	type lab struct {
		y          float64
		name, rest string
	}
	var labs []lab
	for _, r := range ch.c.rules {
		dir := "above"
		if r.below {
			dir = "below"
		}
		l := lab{name: truncate(r.name, 22), rest: dir + " " + formatThreshold(r.threshold)}
		var ok bool
		l.y, ok = ch.thresholdY(r.threshold)
		if !ok {
			l.rest += " (off scale)"
			if r.threshold > ch.hi {
				l.name = "↑ " + l.name
			} else {
				l.name = "↓ " + l.name
			}
		}
		labs = append(labs, l)
	}
	slices.SortStableFunc(labs, func(a, b lab) int { return cmp.Compare(a.y, b.y) })
	for i := 1; i < len(labs); i++ {
		labs[i].y = max(labs[i].y, labs[i-1].y+26)
	}
	for _, l := range labs {
		s.label(areaRight+6, l.y-1, ` fill="`+colThresh+`" class="threshold-label"`, l.name)
		s.label(areaRight+6, l.y+11, ` fill="`+colThresh+`"`, l.rest)
	}
}

// truncate shortens s to at most n characters.
func truncate(s string, n int) string {
	if utf8.RuneCountInString(s) <= n {
		return s
	}
	r := []rune(s)
	return string(r[:n-1]) + "…"
}

// crossings marks where the observed data crossed each threshold, with
// the lead time the incident open then gave, or "no warning".
func (ch *chart) crossings(s *svgOut) {
	for _, r := range ch.c.rules {
		var incs []plotIncident // the rule's, in order of opening; they do not overlap
		for _, in := range ch.incidents {
			if in.rule == r.name {
				incs = append(incs, in)
			}
		}
		lastMark, labelEnd := math.Inf(-1), math.Inf(-1)
		marked := "" // the incident whose first crossing is marked
		drawn, j := 0, 0
		for _, p := range r.crossings {
			x, y := ch.x(p.t), ch.y(p.v)
			for j+1 < len(incs) && incs[j+1].opened <= p.t {
				j++
			}
			note, short, inc := "no incident was open", "no warning", ""
			if j < len(incs) && incs[j].opened <= p.t && (incs[j].resolved == 0 || incs[j].resolved > p.t) {
				in := incs[j]
				inc = in.id
				short = "lead " + shortDuration(p.t-in.opened)
				note = fmt.Sprintf("incident %s opened %s earlier", shortID(in.id), shortDuration(p.t-in.opened))
			}
			// The first crossing of an incident is always marked; others
			// only clear of the last marker.
			first := inc != "" && inc != marked
			if !first && x-lastMark < crossingGap {
				continue
			}
			if first {
				marked = inc
			}
			lastMark = x
			drawn++
			s.str(`<g class="crossing"><title>`)
			s.text(fmt.Sprintf("data crosses %s (%s) at %s: %s", r.name, formatThreshold(r.threshold), clockText(p.t), note))
			s.str("</title>")
			diamond(s, x, y)
			s.str("</g>\n")
			// Label the first crossing of each incident and those without
			// one, where the label clears the last.
			if !first && inc != "" {
				continue
			}
			w := 6 * float64(utf8.RuneCountInString(short))
			lx, anchor, start := x+7, "", x+7
			if lx+w > areaRight { // keep it inside the plot
				lx, anchor, start = x-7, ` text-anchor="end"`, x-7-w
			}
			if start < labelEnd+8 {
				continue
			}
			labelEnd = start + w
			s.label(lx, y-7, anchor+` font-size="10" fill="`+colCross+`" stroke="#ffffff" stroke-width="3" stroke-opacity="0.8" paint-order="stroke"`, short)
		}
		if r.seen > drawn {
			s.label(areaLeft+6, areaBottom-8, ` font-size="10" fill="`+colCross+`"`,
				fmt.Sprintf("%s: the data crosses %d times; %d marked", r.name, r.seen, drawn))
		}
	}
}

// eventMarkers draws the breach events in a lane per rule along the top of
// the plot, and their ETAs as ticks on the threshold line. Openings are
// drawn last, on top: they matter most, and a short incident's
// resolution would otherwise hide them.
func (ch *chart) eventMarkers(s *svgOut) {
	for pass := 0; pass < 2; pass++ {
		for _, e := range ch.c.events {
			opened := e.state == string(forecast.Opened)
			if opened != (pass == 1) {
				continue
			}
			col, class := colUpdated, "updated"
			switch {
			case opened:
				col, class = colOpened, "opened"
			case e.state == string(forecast.Resolved):
				col, class = colResolved, "resolved"
			}
			eta := "no eta within the horizon"
			if e.eta != 0 {
				eta = "eta " + clockText(e.eta)
			}
			title := fmt.Sprintf("%s %s: incident %s, probability %.2f, %s (%s)", e.rule, e.state, shortID(e.incident), e.prob, eta, clockText(e.at))
			if ch.inTime(e.at) {
				s.str(`<g class="`, class, `"><title>`)
				s.text(title)
				s.str("</title>")
				marker(s, class, ch.x(e.at), ch.laneY(e.rule))
				s.str("</g>\n")
			}
			if y, ok := ch.thresholdY(e.threshold); ok && e.eta != 0 && class != "resolved" && ch.inTime(e.eta) {
				s.str(`<g class="eta"><title>`)
				s.text(title)
				s.str("</title>")
				etaTick(s, ch.x(e.eta), y, col)
				s.str("</g>\n")
			}
		}
	}
}

// marker draws an event's shape: a triangle for opened, a circle for
// updated, a square for resolved.
func marker(s *svgOut, state string, x, y float64) {
	switch state {
	case string(forecast.Opened):
		s.str(`<polygon fill="`, colOpened, `" stroke="#ffffff" stroke-width="0.8" points="`)
		s.pt(x, y-6)
		s.pt(x-6, y+5)
		s.pt(x+6, y+5)
		s.str(`"/>`)
	case string(forecast.Resolved):
		s.str(`<rect fill="`, colResolved, `" stroke="#ffffff" stroke-width="0.8"`)
		s.attr("x", x-5)
		s.attr("y", y-5)
		s.str(` width="10" height="10"/>`)
	default:
		s.str(`<circle fill="`, colUpdated, `" stroke="#ffffff" stroke-width="0.8" r="4.5"`)
		s.attr("cx", x)
		s.attr("cy", y)
		s.str("/>")
	}
}

// etaTick draws a short vertical tick.
func etaTick(s *svgOut, x, y float64, col string) {
	s.str("<line")
	s.attr("x1", x)
	s.attr("y1", y-6)
	s.attr("x2", x)
	s.attr("y2", y+6)
	s.str(` stroke="`, col, `" stroke-width="2"/>`)
}

// diamond draws a crossing marker.
func diamond(s *svgOut, x, y float64) {
	s.str(`<polygon fill="`, colCross, `" stroke="#ffffff" stroke-width="0.8" points="`)
	s.pt(x, y-6)
	s.pt(x+5, y)
	s.pt(x, y+6)
	s.pt(x-5, y)
	s.str(`"/>`)
}

// axes draws the frame, the tick labels and the axis names.
func (ch *chart) axes(s *svgOut) {
	s.str(`<rect fill="none" stroke="#888888" stroke-width="1"`)
	s.attr("x", areaLeft)
	s.attr("y", areaTop)
	s.attr("width", areaRight-areaLeft)
	s.attr("height", areaBottom-areaTop)
	s.str("/>\n")
	for _, v := range ch.yTicks {
		s.label(areaLeft-6, ch.y(v), ` dy="0.35em" text-anchor="end"`, formatValue(v, ch.yStep))
	}
	if len(ch.yTicks) == 0 { // no nice scale: name the ends
		s.label(areaLeft-6, areaTop, ` dy="0.35em" text-anchor="end"`, strconv.FormatFloat(ch.hi, 'g', 4, 64))
		s.label(areaLeft-6, areaBottom, ` dy="0.35em" text-anchor="end"`, strconv.FormatFloat(ch.lo, 'g', 4, 64))
	}
	for _, tk := range ch.xTicks {
		x := ch.x(tk.t)
		s.label(x, areaBottom+16, ` text-anchor="middle"`, tk.label)
		if tk.sub != "" {
			s.label(x, areaBottom+30, ` text-anchor="middle" fill="#666666"`, tk.sub)
		}
	}
	s.label(areaRight, areaBottom+44, ` text-anchor="end" fill="#666666"`, "time (UTC)")
}
