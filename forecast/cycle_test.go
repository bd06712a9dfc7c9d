package forecast

import (
	"encoding/csv"
	"encoding/json"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strconv"
	"testing"
	"time"

	"github.com/headroom-dev/headroom/state"
)

// Cycle detection on the classic seasonal series, through the core that
// works on a plain uniform series, searching every period up to half the
// series.
func TestDetectReference(t *testing.T) {
	ref := sharedDir(t)
	raw, err := os.ReadFile(filepath.Join(ref, "r", "findfrequency.json"))
	if err != nil {
		t.Skipf("findfrequency.json: %v", err)
	}
	var ff struct {
		CO2           int   `json:"co2"`
		AirPassengers int   `json:"AirPassengers"`
		Taylor        int   `json:"taylor"`
		TaylorMSTS    []int `json:"taylor_msts_periods"`
	}
	if err := json.Unmarshal(raw, &ff); err != nil || len(ff.TaylorMSTS) != 2 {
		t.Fatalf("findfrequency.json: %v", err)
	}
	tests := []struct {
		series     string
		period, p2 int
		minACF     float64 // floor on the autocorrelation at the period
	}{
		{"co2", ff.CO2, 0, 0.9},                             // forecast::findfrequency (r/findfrequency.json), forecast 8.20
		{"AirPassengers", ff.AirPassengers, 0, 0.7},         // forecast::findfrequency (r/findfrequency.json), forecast 8.20
		{"taylor", ff.TaylorMSTS[0], ff.TaylorMSTS[1], 0.8}, // msts periods of forecast::taylor (r/findfrequency.json)
		{"co2_outliers", ff.CO2, 0, 0.3},                    // co2's period (findfrequency, same file) despite two ±25 ppm outliers
	}
	if ff.Taylor != ff.TaylorMSTS[0] {
		t.Fatalf("findfrequency taylor %d, msts %v", ff.Taylor, ff.TaylorMSTS)
	}
	var cs cycleScratch
	for _, tc := range tests {
		y := readDataset(t, tc.series)
		p, p2, r := cs.detect(y, 2, len(y)/2)
		t.Logf("%s: period %d, second %d, acf %.3f", tc.series, p, p2, r)
		if p != tc.period || p2 != tc.p2 || r < tc.minACF {
			t.Errorf("%s: period %d, second %d, acf %.3f; want %d, %d, acf ≥ %.2f", tc.series, p, p2, r, tc.period, tc.p2, tc.minACF)
		}
	}
}

// levelView builds a view holding only the default layout's uniform
// levels, ending at end: hourly from hourly, fifteen-minute buckets as
// quarter repeated hourly values plus noise of sd q, minute buckets as NaN.
func levelView(end int64, hourly []float64, quarter func(i int) float64) *state.View {
	v := &state.View{End: end}
	mins := state.LevelView{Width: minute, Start: end - 120*minute}
	for range 120 {
		mins.Y = append(mins.Y, math.NaN())
	}
	q := state.LevelView{Width: 15 * minute, Start: end - 96*15*minute}
	for i := range 96 {
		q.Y = append(q.Y, quarter(i))
	}
	h := state.LevelView{Width: hour, Start: end - int64(len(hourly))*hour, Y: hourly}
	v.Levels = []state.LevelView{mins, q, h}
	return v
}

// Invented data: white noise, random walks, a steady trend and a single
// level shift must show no cycle. The rate over many seeds is reported;
// it must stay at or below 1 %.
func TestDetectNoCycle(t *testing.T) {
	const seeds = 1000
	end := int64(1_700_000_000_000) / hour * hour
	sc := NewScratch()
	kinds := []struct {
		name string
		gen  func(rng *rand.Rand, y []float64)
		max  float64 // allowed false-detection rate
	}{
		{"white noise", func(rng *rand.Rand, y []float64) {
			for i := range y {
				y[i] = 5 + rng.NormFloat64()
			}
		}, 0.01},
		{"random walk", func(rng *rand.Rand, y []float64) {
			acc := 0.0
			for i := range y {
				acc += rng.NormFloat64()
				y[i] = acc
			}
		}, 0.01},
		{"trend", func(rng *rand.Rand, y []float64) {
			for i := range y {
				y[i] = 0.05*float64(i) + rng.NormFloat64()
			}
		}, 0.01},
		{"level shift", func(rng *rand.Rand, y []float64) {
			at := len(y)/4 + rng.IntN(len(y)/2)
			for i := range y {
				y[i] = rng.NormFloat64()
				if i >= at {
					y[i] += 8
				}
			}
		}, 0.01},
		{"noise with gaps", func(rng *rand.Rand, y []float64) {
			for i := range y {
				y[i] = rng.NormFloat64()
				if rng.IntN(5) == 0 {
					y[i] = math.NaN()
				}
			}
		}, 0.01},
	}
	for _, k := range kinds {
		for _, hours := range []int{336, 200, 72} {
			found := 0
			periods := map[time.Duration]int{}
			for seed := range seeds {
				rng := rand.New(rand.NewPCG(uint64(seed), uint64(hours)))
				y := make([]float64, hours)
				k.gen(rng, y)
				qy := make([]float64, 96)
				k.gen(rng, qy)
				v := levelView(end, y, func(i int) float64 { return qy[i] })
				c := DetectCycles(v, sc)
				if c.Period > 0 {
					found++
					periods[c.Period]++
				}
				if c.At != end {
					t.Fatalf("At = %d, want %d", c.At, end)
				}
			}
			rate := float64(found) / seeds
			t.Logf("%s, %d h: cycles found in %d of %d seeds (%.1f %%) %v", k.name, hours, found, seeds, 100*rate, periods)
			if rate > k.max {
				t.Errorf("%s, %d h: false-detection rate %.1f %%, want ≤ %.0f %%", k.name, hours, 100*rate, 100*k.max)
			}
		}
	}
}

// Invented data: the two-day check alone on white noise, random walks,
// trends, level shifts and noise with gaps of two to three days must find
// a daily cycle in at most 1 % of seeds, and find a daily cycle of
// amplitude 1 under hourly noise of 0.15 (a weaker one waits for the
// autocorrelation at three days).
func TestTwoDays(t *testing.T) {
	const seeds = 1000
	end := int64(1_700_000_000_000) / hour * hour
	gens := []struct {
		name string
		gen  func(rng *rand.Rand, y []float64)
	}{
		{"white noise", func(rng *rand.Rand, y []float64) {
			for i := range y {
				y[i] = rng.NormFloat64()
			}
		}},
		{"random walk", func(rng *rand.Rand, y []float64) {
			acc := 0.0
			for i := range y {
				acc += rng.NormFloat64()
				y[i] = acc
			}
		}},
		{"trend", func(rng *rand.Rand, y []float64) {
			for i := range y {
				y[i] = 0.05*float64(i) + rng.NormFloat64()
			}
		}},
		{"level shift", func(rng *rand.Rand, y []float64) {
			at := len(y)/4 + rng.IntN(len(y)/2)
			for i := range y {
				y[i] = rng.NormFloat64()
				if i >= at {
					y[i] += 8
				}
			}
		}},
		{"noise with gaps", func(rng *rand.Rand, y []float64) {
			for i := range y {
				y[i] = rng.NormFloat64()
				if rng.IntN(5) == 0 {
					y[i] = math.NaN()
				}
			}
		}},
	}
	var cs cycleScratch
	for _, g := range gens {
		for _, hours := range []int{48, 60, 71} {
			found := 0
			for seed := range seeds {
				rng := rand.New(rand.NewPCG(uint64(seed), uint64(1000+hours)))
				y := make([]float64, hours)
				g.gen(rng, y)
				lv := state.LevelView{Width: hour, Start: end - int64(hours)*hour, Y: y}
				if _, ok := cs.twoDays(&lv); ok {
					found++
				}
			}
			rate := float64(found) / seeds
			t.Logf("%s, %d h: daily cycle in %d of %d seeds", g.name, hours, found, seeds)
			if rate > 0.01 {
				t.Errorf("%s, %d h: false-detection rate %.1f %%, want ≤ 1 %%", g.name, hours, 100*rate)
			}
		}
	}
	missed := 0
	for seed := range 100 {
		rng := rand.New(rand.NewPCG(uint64(seed), 7))
		y := make([]float64, 50)
		for i := range y {
			y[i] = 10 + math.Sin(2*math.Pi*float64(i)/24) + 0.15*rng.NormFloat64()
		}
		lv := state.LevelView{Width: hour, Start: end - 50*hour, Y: y}
		if _, ok := cs.twoDays(&lv); !ok {
			missed++
		}
	}
	if missed > 5 {
		t.Errorf("daily cycle under noise: missed in %d of 100 seeds", missed)
	}
	// Too long or too short a history is left to detect.
	for _, hours := range []int{47, 72} {
		lv := state.LevelView{Width: hour, Start: end - int64(hours)*hour, Y: make([]float64, hours)}
		for i := range lv.Y {
			lv.Y[i] = math.Sin(2 * math.Pi * float64(i) / 24)
		}
		if _, ok := cs.twoDays(&lv); ok {
			t.Errorf("%d h: two-day check ran", hours)
		}
	}
}

// Invented data: minute points of a cycle plus noise, seen through the
// default layout.
func TestDetectCyclesView(t *testing.T) {
	day := func(i int) float64 { return math.Sin(2 * math.Pi * float64(i) / 1440) }
	weekday := func(i int) float64 {
		d := (i / 1440) % 7
		if d >= 5 { // a quiet weekend
			return 0.3*day(i) - 1.5
		}
		return day(i)
	}
	tests := []struct {
		name       string
		days       int
		sigma      float64
		truth      func(i int) float64
		p1, p2     time.Duration
		minACF     float64
		minuteSkip int // every how many minutes a point exists
	}{
		{"daily", 14, 1, func(i int) float64 { return 10 + day(i) }, 24 * time.Hour, 0, 0.5, 1},
		{"daily, one week", 7, 1, func(i int) float64 { return 10 + day(i) }, 24 * time.Hour, 0, 0.5, 1},
		{"daily on a trend", 14, 1, func(i int) float64 { return 10 + 3*day(i) + float64(i)/1440 }, 24 * time.Hour, 0, 0.5, 1},
		{"daily, noisy minutes", 14, 5, func(i int) float64 { return 10 + day(i) }, 24 * time.Hour, 0, 0.25, 1},
		{"daily and weekly", 14, 1, func(i int) float64 { return 10 + weekday(i) }, 24 * time.Hour, 7 * 24 * time.Hour, 0.3, 1},
		{"every 4 h", 14, 1, func(i int) float64 { return math.Sin(2 * math.Pi * float64(i) / 240) }, 4 * time.Hour, 0, 0.5, 1},
		{"every 90 min, one day", 1, 0.5, func(i int) float64 { return math.Sin(2 * math.Pi * float64(i) / 90) }, 90 * time.Minute, 0, 0.5, 1},
		{"none", 14, 1, func(i int) float64 { return 10 }, 0, 0, 0, 1},
		{"two days only", 2, 1, func(i int) float64 { return 10 + day(i) }, 24 * time.Hour, 0, 0.8, 1}, // the two-day check
		{"one day only", 1, 1, func(i int) float64 { return 10 + day(i) }, 0, 0, 0, 1},
	}
	for _, tc := range tests {
		s := newSeries(tc.days*1440, tc.sigma, 3, tc.truth)
		var v state.View
		end := s.end(tc.days*1440 - 1)
		s.view(end, &v)
		c := DetectCycles(&v, nil)
		if c.Period != tc.p1 || c.Period2 != tc.p2 || (tc.p1 > 0 && c.ACF < tc.minACF) {
			t.Errorf("%s: %+v, want periods %v, %v, acf ≥ %.2f", tc.name, c, tc.p1, tc.p2, tc.minACF)
		}
		if want := end / hour * hour; c.At != want {
			t.Errorf("%s: At %d, want %d", tc.name, c.At, want)
		}
	}
	if c := DetectCycles(nil, nil); c != (Cycles{}) {
		t.Errorf("nil view: %+v", c)
	}
	if c := DetectCycles(&state.View{}, nil); c != (Cycles{}) {
		t.Errorf("empty view: %+v", c)
	}
}

// nabDir finds the NAB corpus beside the reference folder, or skips.
func nabDir(t *testing.T) string {
	t.Helper()
	dir := filepath.Join(sharedDir(t), "..", "datasets", "nab", "data")
	if _, err := os.Stat(dir); err != nil {
		t.Skipf("NAB data absent (%s); skipping", dir)
	}
	return dir
}

// nabView feeds a NAB series (timestamp,value) into a store with the
// default layout and returns the view after its last point.
func nabView(t *testing.T, path string) *state.View {
	t.Helper()
	return nabViews(t, path, 0)[0]
}

// nabViews feeds a NAB series into a store with the default layout and
// returns the view after every points points and after the last.
func nabViews(t *testing.T, path string, every int) []*state.View {
	t.Helper()
	fh, err := os.Open(path)
	if err != nil {
		t.Skipf("%s: %v", filepath.Base(path), err)
	}
	defer fh.Close()
	recs, err := csv.NewReader(fh).ReadAll()
	if err != nil || len(recs) < 2 {
		t.Fatalf("%s: %v", path, err)
	}
	st, err := state.New(state.Config{Layout: state.DefaultLayout(), Partitions: 1})
	if err != nil {
		t.Fatal(err)
	}
	key := state.MakeKey(nil, []byte("nab"), nil)
	var last int64
	var views []*state.View
	for i, r := range recs[1:] {
		if every > 0 && i > 0 && i%every == 0 {
			v := new(state.View)
			st.Do(key, func(s *state.Series) { s.View(v, 0) })
			views = append(views, v)
		}
		ts, err := time.Parse(time.DateTime, r[0])
		if err != nil {
			t.Fatalf("%s: %v", path, err)
		}
		v, err := strconv.ParseFloat(r[1], 64)
		if err != nil {
			t.Fatalf("%s: %v", path, err)
		}
		last = ts.UnixMilli()
		if err := st.Add(key, last, v, nil); err != nil {
			t.Fatalf("%s: %v", path, err)
		}
	}
	// Close the last bucket with a point just after it.
	if err := st.Add(key, last+5*minute, 0, nil); err != nil {
		t.Fatal(err)
	}
	v := new(state.View)
	st.Do(key, func(s *state.Series) { s.View(v, 0) })
	return append(views, v)
}

// Real series from the Numenta Anomaly Benchmark, fed through a store.
func TestDetectCyclesNAB(t *testing.T) {
	dir := nabDir(t)
	tests := []struct {
		file   string
		p1, p2 time.Duration
	}{
		// NAB's artificial series: "daily" by name and construction.
		{"artificialNoAnomaly/art_daily_small_noise.csv", 24 * time.Hour, 0},
		{"artificialNoAnomaly/art_noisy.csv", 0, 0},
		{"artificialNoAnomaly/art_flatline.csv", 0, 0},
	}
	for _, tc := range tests {
		v := nabView(t, filepath.Join(dir, tc.file))
		c := DetectCycles(v, nil)
		t.Logf("%s: %+v", tc.file, c)
		if c.Period != tc.p1 || c.Period2 != tc.p2 {
			t.Errorf("%s: periods %v, %v; want %v, %v", tc.file, c.Period, c.Period2, tc.p1, tc.p2)
		}
	}

	// NYC taxi passengers every 30 min (NAB realKnownCause/nyc_taxi.csv)
	// has a daily and a weekly cycle; the weekly one is mostly a change of
	// shape at weekends, and holidays and the January 2015 blizzard (one
	// of NAB's labelled anomalies) blur it. Every two weeks along the
	// series, from two weeks of history on: daily always, never another
	// period, and weekly in a good part of the windows.
	views := nabViews(t, filepath.Join(dir, "realKnownCause/nyc_taxi.csv"), 14*48)
	weekly := 0
	for _, v := range views[1:] {
		c := DetectCycles(v, nil)
		day := time.UnixMilli(v.End).UTC().Format(time.DateOnly)
		if c.Period != 24*time.Hour || (c.Period2 != 0 && c.Period2 != 7*24*time.Hour) {
			t.Errorf("nyc_taxi to %s: %+v", day, c)
		}
		if c.Period2 != 0 {
			weekly++
		}
	}
	t.Logf("nyc_taxi: weekly cycle found in %d of %d two-week windows", weekly, len(views)-1)
	if weekly < (len(views)-1)/3 {
		t.Errorf("nyc_taxi: weekly cycle found in %d of %d windows", weekly, len(views)-1)
	}
}
