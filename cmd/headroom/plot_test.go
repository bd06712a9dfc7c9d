package main

import (
	"bufio"
	"bytes"
	"context"
	"encoding/json"
	"encoding/xml"
	"errors"
	"flag"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/headroom-dev/headroom/forecast"
	"github.com/headroom-dev/headroom/stream"
)

var update = flag.Bool("update", false, "rewrite the golden files under testdata/plot")

// svgNode is an element of a parsed SVG file.
type svgNode struct {
	name     string
	attr     map[string]string
	children []*svgNode
	text     string
}

func (n *svgNode) walk(fn func(*svgNode)) {
	fn(n)
	for _, c := range n.children {
		c.walk(fn)
	}
}

// title is the text of the element's <title> child.
func (n *svgNode) title() string {
	for _, c := range n.children {
		if c.name == "title" {
			return c.text
		}
	}
	return ""
}

// parseSVG parses b with encoding/xml, failing the test unless it is
// well-formed with an <svg> root.
func parseSVG(t *testing.T, b []byte) *svgNode {
	t.Helper()
	dec := xml.NewDecoder(bytes.NewReader(b))
	var root *svgNode
	var stack []*svgNode
	for {
		tok, err := dec.Token()
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			t.Fatalf("SVG is not well-formed: %v", err)
		}
		switch tk := tok.(type) {
		case xml.StartElement:
			n := &svgNode{name: tk.Name.Local, attr: map[string]string{}}
			for _, a := range tk.Attr {
				n.attr[a.Name.Local] = a.Value
			}
			if len(stack) > 0 {
				p := stack[len(stack)-1]
				p.children = append(p.children, n)
			} else if root == nil {
				root = n
			}
			stack = append(stack, n)
		case xml.CharData:
			if len(stack) > 0 {
				stack[len(stack)-1].text += string(tk)
			}
		case xml.EndElement:
			stack = stack[:len(stack)-1]
		}
	}
	if root == nil || root.name != "svg" || len(stack) != 0 {
		t.Fatalf("SVG has no complete <svg> root")
	}
	return root
}

// checkCoordinates fails the test if a coordinate is not a finite number
// near the canvas.
func checkCoordinates(t *testing.T, root *svgNode) {
	t.Helper()
	bad := 0
	root.walk(func(n *svgNode) {
		for _, name := range [...]string{"x", "y", "x1", "y1", "x2", "y2", "cx", "cy", "r", "width", "height", "points"} {
			v, ok := n.attr[name]
			if !ok || v == "100%" {
				continue
			}
			for _, f := range strings.FieldsFunc(v, func(r rune) bool { return r == ' ' || r == ',' }) {
				x, err := strconv.ParseFloat(f, 64)
				if err != nil || math.IsNaN(x) || math.IsInf(x, 0) || x < -100 || x > svgWidth+100 {
					if bad++; bad <= 5 {
						t.Errorf("<%s %s=%q>: %q is not a finite coordinate on the canvas", n.name, name, v, f)
					}
				}
			}
		}
		for k, v := range n.attr {
			if l := strings.ToLower(v); strings.Contains(l, "nan") || strings.Contains(l, "inf") {
				t.Errorf("<%s %s=%q> holds a non-finite value", n.name, k, v)
			}
		}
	})
}

// byClass returns the elements of an element name and class.
func byClass(root *svgNode, name, class string) []*svgNode {
	var out []*svgNode
	root.walk(func(n *svgNode) {
		if n.name == name && n.attr["class"] == class {
			out = append(out, n)
		}
	})
	return out
}

// writeFillCleanupCSV writes an invented scenario series: a volume filling
// at 2 %/h from 50 % that crosses 90 % at 20 h, is cleaned up to 30 % at
// 22 h and then stays there, one point a minute with small noise.
func writeFillCleanupCSV(t *testing.T) string {
	t.Helper()
	rng := rand.New(rand.NewPCG(5, 6))
	var b strings.Builder
	b.WriteString("timestamp,value\n")
	start := time.Date(2026, 10, 1, 0, 0, 0, 0, time.UTC)
	for m := 0; m < 28*60; m++ {
		v := 0.5 + 0.02*float64(m)/60
		if m >= 22*60 {
			v = 0.3
		}
		fmt.Fprintf(&b, "%s,%.5f\n", start.Add(time.Duration(m)*time.Minute).Format("2006-01-02 15:04:05"), v+0.002*rng.NormFloat64())
	}
	p := filepath.Join(t.TempDir(), "volume.csv")
	if err := os.WriteFile(p, []byte(b.String()), 0o600); err != nil {
		t.Fatal(err)
	}
	return p
}

// TestPlotReplay draws the replay of a filling volume whose incident opens
// before the data crosses the threshold and resolves after the clean-up.
func TestPlotReplay(t *testing.T) {
	in := writeFillCleanupCSV(t)
	dir := t.TempDir()
	var svgs [2][]byte
	var out []byte
	for i := range svgs {
		p := filepath.Join(dir, fmt.Sprintf("plot%d.svg", i))
		var stdout, stderr bytes.Buffer
		code := run(context.Background(), []string{"replay", "--in", in, "--out", "-", "--horizon", "6h", "--every", "5m",
			"--threshold", "0.9", "--warmup", "0", "--plot", p}, &stdout, &stderr)
		if code != 0 {
			t.Fatalf("exit %d: %s", code, stderr.String())
		}
		b, err := os.ReadFile(p)
		if err != nil {
			t.Fatal(err)
		}
		svgs[i], out = b, stdout.Bytes()
	}
	if !bytes.Equal(svgs[0], svgs[1]) {
		t.Error("two runs over the same input gave different SVG files")
	}

	// The incident, from the JSON Lines records.
	var opened, resolved []string
	sc := bufio.NewScanner(bytes.NewReader(out))
	sc.Buffer(nil, 1<<20)
	for sc.Scan() {
		var r stream.BreachRecord
		if err := json.Unmarshal(sc.Bytes(), &r); err != nil {
			t.Fatal(err)
		}
		switch {
		case r.Kind == "breach" && r.State == "opened":
			opened = append(opened, r.Incident)
		case r.Kind == "breach" && r.State == "resolved":
			resolved = append(resolved, r.Incident)
		}
	}
	if len(opened) != 1 || len(resolved) != 1 || opened[0] != resolved[0] {
		t.Fatalf("scenario gave opened %v, resolved %v; want one incident that opens and resolves", opened, resolved)
	}
	id := shortID(opened[0])

	root := parseSVG(t, svgs[0])
	checkCoordinates(t, root)
	obs := byClass(root, "polyline", "observed")
	if len(obs) != 1 {
		t.Fatalf("%d observed polylines, want 1", len(obs))
	}
	if n := len(strings.Fields(obs[0].attr["points"])); n < 200 || n > 4000 {
		t.Errorf("observed polyline has %d vertices, want a few hundred to a few thousand", n)
	}
	if len(byClass(root, "polygon", "band95")) == 0 || len(byClass(root, "polygon", "band80")) == 0 {
		t.Error("no forecast band polygons")
	}
	if len(byClass(root, "polyline", "mean")) == 0 {
		t.Error("no forecast mean lines")
	}

	// The threshold line sits where the value axis puts 0.9, read off
	// the axis' own tick labels.
	lines := byClass(root, "line", "threshold")
	if len(lines) != 1 {
		t.Fatalf("%d threshold lines, want 1", len(lines))
	}
	y1, _ := strconv.ParseFloat(lines[0].attr["y1"], 64)
	if want := axisY(t, root, 0.9); math.Abs(y1-want) > 0.11 {
		t.Errorf("threshold line at y=%.2f, the axis puts 0.9 at %.2f", y1, want)
	}

	for _, class := range []string{"opened", "resolved"} {
		gs := byClass(root, "g", class)
		if len(gs) != 1 {
			t.Errorf("%d %s markers, want 1", len(gs), class)
			continue
		}
		if title := gs[0].title(); !strings.Contains(title, "incident "+id) || !strings.Contains(title, "probability") {
			t.Errorf("%s marker title %q lacks incident %s and its probability", class, title, id)
		}
	}
	cross := byClass(root, "g", "crossing")
	if len(cross) == 0 {
		t.Fatal("no marker where the data crosses the threshold")
	}
	if title := cross[0].title(); !strings.Contains(title, "incident "+id+" opened") {
		t.Errorf("crossing title %q does not give the lead time of incident %s", title, id)
	}
}

// axisY reads the value axis off the tick labels (right-aligned text
// left of the plot) and returns where it puts v.
func axisY(t *testing.T, root *svgNode, v float64) float64 {
	t.Helper()
	type tick struct{ v, y float64 }
	var ticks []tick
	root.walk(func(n *svgNode) {
		if n.name != "text" || n.attr["text-anchor"] != "end" || n.attr["x"] != strconv.FormatFloat(areaLeft-6, 'f', 1, 64) {
			return
		}
		tv, err1 := strconv.ParseFloat(strings.TrimSpace(n.text), 64)
		ty, err2 := strconv.ParseFloat(n.attr["y"], 64)
		if err1 == nil && err2 == nil {
			ticks = append(ticks, tick{tv, ty})
		}
	})
	if len(ticks) < 2 {
		t.Fatalf("%d value axis ticks, want several", len(ticks))
	}
	a, b := ticks[0], ticks[len(ticks)-1]
	return a.y + (v-a.v)/(b.v-a.v)*(b.y-a.y)
}

// goldenCollector is an invented replay (scenario data) fed straight to a
// collector, so that the golden file tests the drawing and not the
// engines: three hours of a filling volume, forecasts every ten minutes,
// an incident that opens, is updated and resolves, and a crossing.
func goldenCollector() *plotCollector {
	rules := []forecast.Rule{{Name: "volume-full", Threshold: 0.8, Direction: forecast.Above}}
	c := newPlotCollector("golden.csv", "volume", rules, time.Hour, false)
	start := time.Date(2026, 3, 1, 0, 0, 0, 0, time.UTC)
	at := func(m int) time.Time { return start.Add(time.Duration(m) * time.Minute) }
	level := func(m int) float64 { return 0.5 + 0.12*float64(m)/60 }
	incident := "6f1c2a9e-0000-5000-8000-000000000001"
	for m := 0; m <= 180; m += 5 {
		v := level(m)
		if m >= 165 {
			v = 0.4 // cleaned up, after crossing 0.8 at 150
		}
		c.Observe(at(m).UnixMilli(), v+0.004*math.Sin(float64(m)))
		if m < 20 || m%10 != 0 {
			continue
		}
		rec := &stream.ForecastRecord{Kind: "forecast", At: at(m).Format(time.RFC3339), Engine: "incline", Level: v, TrendPerHour: 0.1}
		for k := 1; k <= 4; k++ {
			mean := v + 0.1*float64(k)/4
			w := 0.02 * float64(k)
			rec.Points = append(rec.Points, stream.ForecastPoint{T: at(m + 15*k).Format(time.RFC3339), Mean: mean,
				Lower80: mean - w, Upper80: mean + w, Lower95: mean - 1.6*w, Upper95: mean + 1.6*w})
		}
		c.Forecast(rec)
		breach := func(state string, p float64, eta time.Time) {
			c.Breach(&stream.BreachRecord{Kind: "breach", Rule: "volume-full", State: state, At: at(m).Format(time.RFC3339),
				Incident: incident, Threshold: 0.8, Direction: "above", Probability: p, ETA: eta.Format(time.RFC3339)})
		}
		switch m {
		case 100:
			breach("opened", 0.91, at(180))
		case 130:
			breach("updated", 0.99, at(155))
		case 160:
			breach("updated", 1, at(150))
		case 180:
			breach("resolved", 0.02, at(400))
		}
	}
	return c
}

func TestPlotGolden(t *testing.T) {
	var b bytes.Buffer
	if err := goldenCollector().chart().writeSVG(&b); err != nil {
		t.Fatal(err)
	}
	root := parseSVG(t, b.Bytes())
	checkCoordinates(t, root)
	var again bytes.Buffer
	if err := goldenCollector().chart().writeSVG(&again); err != nil || !bytes.Equal(b.Bytes(), again.Bytes()) {
		t.Errorf("second rendering differs (err %v)", err)
	}
	golden := filepath.Join("testdata", "plot", "golden.svg")
	if *update {
		if err := os.MkdirAll(filepath.Dir(golden), 0o755); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(golden, b.Bytes(), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	want, err := os.ReadFile(golden)
	if err != nil {
		t.Fatalf("%v (regenerate with go test ./cmd/headroom/ -run TestPlotGolden -update)", err)
	}
	if !bytes.Equal(b.Bytes(), want) {
		t.Errorf("SVG differs from %s; if the change is intended, regenerate it with go test ./cmd/headroom/ -run TestPlotGolden -update", golden)
	}
}

// TestPlotOddInput replays odd files and feeds odd records: every case
// must give a well-formed SVG with finite coordinates, without panicking.
func TestPlotOddInput(t *testing.T) {
	series := func(n int, f func(i int) float64) string {
		var b strings.Builder
		b.WriteString("timestamp,value\n")
		start := time.Date(2026, 1, 1, 0, 0, 0, 0, time.UTC)
		for i := 0; i < n; i++ {
			fmt.Fprintf(&b, "%s,%g\n", start.Add(time.Duration(i)*time.Minute).Format(time.RFC3339), f(i))
		}
		return b.String()
	}
	ramp := func(i int) float64 { return float64(i) }
	cases := []struct {
		name, csv string
		args      []string
		wantErr   bool
	}{
		{name: "empty file", csv: "", wantErr: true},
		{name: "header only", csv: "timestamp,value\n"},
		{name: "one point", csv: series(1, ramp)},
		{name: "flat", csv: series(300, func(int) float64 { return 42 })},
		{name: "flat zero", csv: series(300, func(int) float64 { return 0 })},
		{name: "huge", csv: series(300, func(i int) float64 { return 1e300 * (1 + float64(i%7)/10) })},
		{name: "huge both signs", csv: series(300, func(i int) float64 { return 1e300 * float64(i%3-1) })},
		{name: "negative", csv: series(300, func(i int) float64 { return -500 - 3*float64(i) })},
		{name: "threshold far above", csv: series(300, ramp), args: []string{"--threshold", "1e12"}},
		{name: "threshold far below", csv: series(300, ramp), args: []string{"--threshold", "-1e12", "--direction", "below"}},
		{name: "tiny steps", csv: series(300, func(i int) float64 { return 1e15 + float64(i%2)/8 })},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			dir := t.TempDir()
			in, plot := filepath.Join(dir, "in.csv"), filepath.Join(dir, "out.svg")
			if err := os.WriteFile(in, []byte(tc.csv), 0o600); err != nil {
				t.Fatal(err)
			}
			args := append([]string{"replay", "--in", in, "--out", filepath.Join(dir, "out.jsonl"), "--horizon", "1h", "--warmup", "0", "--plot", plot}, tc.args...)
			if !slices.Contains(args, "--threshold") {
				args = append(args, "--threshold", "100")
			}
			var stdout, stderr bytes.Buffer
			code := run(context.Background(), args, &stdout, &stderr)
			if tc.wantErr {
				if code == 0 {
					t.Errorf("exit 0, want an error")
				}
				return
			}
			if code != 0 {
				t.Fatalf("exit %d: %s", code, stderr.String())
			}
			b, err := os.ReadFile(plot)
			if err != nil {
				t.Fatal(err)
			}
			checkCoordinates(t, parseSVG(t, b))
		})
	}

	// Records straight to a collector: none with points, a wild band,
	// events without an ETA, times that do not parse.
	t.Run("records", func(t *testing.T) {
		rules := []forecast.Rule{{Name: "r", Threshold: 5}, {Name: "other", Threshold: 7, Direction: forecast.Below}}
		c := newPlotCollector("x.csv", "m", rules, 6*time.Hour, true)
		start := time.Date(2026, 1, 1, 0, 0, 0, 0, time.UTC)
		for m := 0; m < 600; m++ {
			ts := start.Add(time.Duration(m) * time.Minute)
			c.Observe(ts.UnixMilli(), float64(m%10))
			c.Forecast(&stream.ForecastRecord{At: ts.Format(time.RFC3339), Engine: "tide", CycleSeconds: 60})
		}
		c.Forecast(&stream.ForecastRecord{At: "garbage"})
		c.Forecast(&stream.ForecastRecord{At: start.Format(time.RFC3339), Points: []stream.ForecastPoint{
			{T: start.Add(time.Hour).Format(time.RFC3339), Mean: 3, Lower80: -1e308, Upper80: 1e308, Lower95: math.Inf(-1), Upper95: 1e308},
			{T: start.Add(2 * time.Hour).Format(time.RFC3339), Mean: 3, Lower80: -1e308, Upper80: 1e308, Lower95: -1e308, Upper95: 1e308},
		}})
		c.Breach(&stream.BreachRecord{State: "opened", At: start.Format(time.RFC3339), Rule: "r", Incident: "x"})
		c.Breach(&stream.BreachRecord{State: "weird", At: start.Add(time.Hour).Format(time.RFC3339), Rule: "nobody", Incident: "<&>"})
		c.Breach(&stream.BreachRecord{State: "resolved", At: "", Rule: "r", Incident: "x"})
		var b bytes.Buffer
		if err := c.chart().writeSVG(&b); err != nil {
			t.Fatal(err)
		}
		checkCoordinates(t, parseSVG(t, b.Bytes()))
	})
	t.Run("nothing", func(t *testing.T) {
		var b bytes.Buffer
		if err := newPlotCollector("", "", nil, time.Hour, false).chart().writeSVG(&b); err != nil {
			t.Fatal(err)
		}
		checkCoordinates(t, parseSVG(t, b.Bytes()))
	})
}

// TestPlotPickFans checks which forecasts are drawn: with --plot-every
// as given, the first of each slot, every breach origin and the last;
// left to the default on a long file, thinned regular origins and, with
// many breach events, only the origins where incidents opened.
func TestPlotPickFans(t *testing.T) {
	start := time.Date(2026, 1, 1, 0, 0, 0, 0, time.UTC)
	feed := func(auto bool) *chart {
		c := newPlotCollector("x.csv", "m", nil, time.Hour, auto)
		for m := 0; m < 100*60; m += 10 { // 100 h, a record every 10 minutes
			at := start.Add(time.Duration(m) * time.Minute).Format(time.RFC3339)
			c.Forecast(&stream.ForecastRecord{At: at, Level: 1, Points: []stream.ForecastPoint{{T: at, Mean: 1}}})
			switch {
			case m%600 == 5*60: // an incident opens every 10 h, at 5 h past
				c.Breach(&stream.BreachRecord{State: "opened", At: at, Incident: strconv.Itoa(m)})
			case m%60 == 30: // and is updated every hour
				c.Breach(&stream.BreachRecord{State: "updated", At: at})
			}
		}
		return c.chart()
	}
	count := func(ch *chart) (regular, opened, breach int) {
		for _, f := range ch.fans {
			regular += b2i(f.regular)
			opened += b2i(f.opened)
			breach += b2i(f.breach)
		}
		return
	}
	// As given: the first record of each of the 100 hourly slots (the
	// openings fall on them), the 10 openings and 100 updates, and the
	// last record (at 99:50, neither).
	ch := feed(false)
	if r, o, b := count(ch); r != 100 || o != 10 || b != 110 || len(ch.fans) != 201 {
		t.Errorf("--plot-every 1h: %d regular, %d opened, %d breach, %d in all; want 100, 10, 110, 201", r, o, b, len(ch.fans))
	}
	// Default: more than 40 slots and 40 events, so the regular ones every
	// 4 h (25), the 10 openings (at 5 h past, on no 4 h mark) and the last.
	ch = feed(true)
	if r, o, b := count(ch); r != 35 || o != 10 || b != 10 || len(ch.fans) != 36 || ch.every != 4*time.Hour {
		t.Errorf("default: %d regular, %d opened, %d breach, %d in all, every %v; want 35, 10, 10, 36, 4h", r, o, b, len(ch.fans), ch.every)
	}
	if last := ch.fans[len(ch.fans)-1].origin; last != start.Add(100*time.Hour-10*time.Minute).UnixMilli() {
		t.Errorf("last origin drawn %v, want the last record", time.UnixMilli(last).UTC())
	}
}

// TestPlotEarlyBreach: a breach event that comes before the forecast
// record of its origin still has that record drawn.
func TestPlotEarlyBreach(t *testing.T) {
	start := time.Date(2026, 1, 1, 0, 0, 0, 0, time.UTC)
	c := newPlotCollector("x.csv", "m", nil, 24*time.Hour, false)
	at := func(m int) string { return start.Add(time.Duration(m) * time.Minute).Format(time.RFC3339) }
	c.Forecast(&stream.ForecastRecord{At: at(0)})
	c.Breach(&stream.BreachRecord{State: "opened", At: at(20)})
	for m := 10; m <= 40; m += 10 {
		c.Forecast(&stream.ForecastRecord{At: at(m)})
	}
	var got []int64
	for _, f := range c.chart().fans {
		got = append(got, (f.origin-start.UnixMilli())/60000)
	}
	if want := []int64{0, 20, 40}; !slices.Equal(got, want) {
		t.Errorf("drawn origins %v minutes, want %v (first, breach, last)", got, want)
	}
}

// TestNiceScale checks the value axis steps: 1, 2 or 5 × 10^k, the common
// practice for chart axes, giving 5 to 8 ticks.
func TestNiceScale(t *testing.T) {
	cases := []struct {
		lo, hi           float64
		step, axLo, axHi float64
	}{
		{0, 1, 0.2, 0, 1},
		{0, 1.5, 0.5, 0, 2},
		{0, 7, 1, 0, 7},
		{0, 8, 2, 0, 8},
		{0.3, 0.9, 0.1, 0.3, 0.9},
		{-3, 97, 20, -20, 100},
		{2.1, 108, 20, 0, 120},
		{-1400, -510, 200, -1400, -400},
		{73.2, 73.9, 0.1, 73.2, 73.9},
		{1e300, 1.7e300, 1e299, 1e300, 1.7e300},
		{1e-9, 5e-9, 1e-9, 1e-9, 5e-9},
	}
	for _, tc := range cases {
		lo, hi, step := niceScale(tc.lo, tc.hi)
		ticks := math.Round((hi-lo)/step) + 1
		if !near(step, tc.step) || !near(lo, tc.axLo) || !near(hi, tc.axHi) || ticks < 5 || ticks > 8 {
			t.Errorf("niceScale(%g, %g) = [%g, %g] step %g (%g ticks); want [%g, %g] step %g", tc.lo, tc.hi, lo, hi, step, ticks, tc.axLo, tc.axHi, tc.step)
		}
	}
	// Every span gives 5 to 8 ticks that cover it (invented spans).
	for i := 0; i < 2000; i++ {
		lo := float64(i%37) - 18.5
		hi := lo + math.Pow(10, float64(i%23)/4-2)*(1+float64(i%11)/3)
		axLo, axHi, step := niceScale(lo, hi)
		n := math.Round((axHi-axLo)/step) + 1
		tol := 1e-6 * (hi - lo) // a tick at a multiple may round a hair inside
		if n < 5 || n > 8 || axLo > lo+tol || axHi < hi-tol {
			t.Fatalf("niceScale(%g, %g) = [%g, %g] step %g: %g ticks", lo, hi, axLo, axHi, step, n)
		}
	}
}

func near(a, b float64) bool { return math.Abs(a-b) <= 1e-9*math.Max(math.Abs(a), math.Abs(b)) }

// TestTimeTicks checks the time axis steps for a few spans.
func TestTimeTicks(t *testing.T) {
	start := time.Date(2026, 10, 5, 3, 17, 0, 0, time.UTC)
	cases := []struct {
		span  time.Duration
		first string
		step  time.Duration
	}{
		{20 * time.Minute, "03:18", 2 * time.Minute},
		{90 * time.Minute, "03:20", 10 * time.Minute},
		{20 * time.Hour, "04:00", 2 * time.Hour},
		{3 * 24 * time.Hour, "12:00", 12 * time.Hour},
		{70 * 24 * time.Hour, "Oct 12", 7 * 24 * time.Hour}, // Mondays
	}
	for _, tc := range cases {
		ticks := timeTicks(start.UnixMilli(), start.Add(tc.span).UnixMilli())
		if len(ticks) < 2 || len(ticks) > maxTimeTicks+1 {
			t.Errorf("span %v: %d ticks", tc.span, len(ticks))
			continue
		}
		if ticks[0].label != tc.first || time.Duration(ticks[1].t-ticks[0].t)*time.Millisecond != tc.step {
			t.Errorf("span %v: first tick %q, step %v; want %q, %v", tc.span, ticks[0].label, time.Duration(ticks[1].t-ticks[0].t)*time.Millisecond, tc.first, tc.step)
		}
	}
}

// TestPlotNAB draws a replay of a real series from the Numenta Anomaly
// Benchmark (../shared/datasets/nab, MIT licence) when it is there.
func TestPlotNAB(t *testing.T) {
	// The package sits two folders below the module root, as TestReplayNAB assumes.
	in := filepath.Join("..", "..", "..", "shared", "datasets", "nab", "data", "realKnownCause", "machine_temperature_system_failure.csv")
	if _, err := os.Stat(in); err != nil {
		t.Skip("../shared/datasets/nab is absent; skipping")
	}
	plot := filepath.Join(t.TempDir(), "nab.svg")
	var stdout, stderr bytes.Buffer
	code := run(context.Background(), []string{"replay", "--in", in, "--out", os.DevNull, "--threshold", "40", "--direction", "below",
		"--horizon", "12h", "--plot", plot}, &stdout, &stderr)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, stderr.String())
	}
	b, err := os.ReadFile(plot)
	if err != nil {
		t.Fatal(err)
	}
	if len(b) > 1<<20 {
		t.Errorf("plot is %d bytes, want under 1 MiB", len(b))
	}
	root := parseSVG(t, b)
	checkCoordinates(t, root)
	if n := len(strings.Fields(byClass(root, "polyline", "observed")[0].attr["points"])); n > 4000 {
		t.Errorf("observed polyline has %d vertices, want at most 4000", n)
	}
	t.Logf("NAB plot: %d bytes", len(b))
}

func TestPlotFlags(t *testing.T) {
	in := writeFillCSV(t, 1)
	for _, args := range [][]string{
		{"--plot-every", "1h"},                      // needs --plot
		{"--plot", os.DevNull, "--plot-every", "0"}, // must be positive
	} {
		var stdout, stderr bytes.Buffer
		if code := run(context.Background(), append([]string{"replay", "--in", in, "--out", os.DevNull}, args...), &stdout, &stderr); code == 0 {
			t.Errorf("%v accepted", args)
		}
	}
}

// BenchmarkPlot measures a day of one-minute points with a forecast
// record each, and the rendering, per replayed point.
func BenchmarkPlot(b *testing.B) {
	start := time.Date(2026, 1, 1, 0, 0, 0, 0, time.UTC)
	recs := make([]stream.ForecastRecord, 1440)
	for m := range recs {
		ts := start.Add(time.Duration(m) * time.Minute)
		recs[m] = stream.ForecastRecord{At: ts.Format(time.RFC3339), Engine: "incline", Level: float64(m)}
		for k := 1; k <= 12; k++ {
			recs[m].Points = append(recs[m].Points, stream.ForecastPoint{T: ts.Add(time.Duration(k) * 5 * time.Minute).Format(time.RFC3339),
				Mean: float64(m + k), Lower80: float64(m), Upper80: float64(m + 2*k), Lower95: float64(m - k), Upper95: float64(m + 3*k)})
		}
	}
	b.ReportAllocs()
	for b.Loop() {
		c := newPlotCollector("bench.csv", "m", []forecast.Rule{{Name: "r", Threshold: 1000}}, 6*time.Hour, true)
		for m := range recs {
			c.Observe(start.Add(time.Duration(m)*time.Minute).UnixMilli(), float64(m))
			c.Forecast(&recs[m])
		}
		if err := c.chart().writeSVG(io.Discard); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N*len(recs)), "ns/point")
}
