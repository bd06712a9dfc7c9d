package backtest

import (
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
	"os"
	"time"

	"github.com/headroom-dev/headroom/forecast"
)

// Suite is a scenario suite file: families of invented series.
type Suite struct {
	Description string `json:"description"`
	// Days of history before the first scored origin, and days scored
	// after it: each drawn per series as a whole number in the range, at
	// most 366 (a year).
	HistoryDays [2]int   `json:"history_days"`
	EvalDays    [2]int   `json:"eval_days"`
	Families    []Family `json:"families"`
}

// Family describes one family of invented series. Kind selects the
// generator; Params give the ranges [low, high] its parameters are drawn
// from uniformly; Rule says where the threshold lies relative to the
// signal, in words (the generator implements it).
type Family struct {
	Name        string                `json:"name"`
	Kind        string                `json:"kind"`
	Description string                `json:"description"`
	Unit        string                `json:"unit"`
	Rule        string                `json:"rule"`
	Variants    int                   `json:"variants"`
	Params      map[string][2]float64 `json:"params"`
}

// maxSuiteDays bounds the days of a suite: a year of history and a year
// scored is more than a backtest of one-minute points needs, and keeps
// the minutes of a series, (history + eval) × 1440, from overflowing.
const maxSuiteDays = 366

// MaxVariants bounds the variants of a family: a thousand minutes of
// evaluation each, more would take days.
const MaxVariants = 10_000

// paramBounds returns the values a parameter may take: beyond them a
// generator would divide by zero, loop for ages or allocate without end.
// Amounts not listed are only kept finite.
func paramBounds(name string) [2]float64 {
	switch name {
	case "noise", "jitter":
		return [2]float64{0, 10}
	case "outliers":
		return [2]float64{0, 1}
	case "cross_at":
		return [2]float64{0, 1}
	case "clean_at", "change_at", "spike_at", "dip_at", "anomaly_at", "reset_at":
		return [2]float64{-1, 1}
	case "harmonic":
		return [2]float64{0, 1}
	case "steps":
		return [2]float64{1, 100}
	case "spike_points", "ramp_minutes":
		return [2]float64{0, 1440}
	case "dip_minutes":
		return [2]float64{0, 7 * 1440}
	case "decay_minutes":
		return [2]float64{1, 7 * 1440}
	case "fill_start_days", "margin_days":
		return [2]float64{0, maxSuiteDays}
	}
	return [2]float64{-1e12, 1e12}
}

// ReadSuite reads and checks a scenario suite.
func ReadSuite(r io.Reader) (*Suite, error) {
	dec := json.NewDecoder(r)
	dec.DisallowUnknownFields()
	var s Suite
	if err := dec.Decode(&s); err != nil {
		return nil, fmt.Errorf("backtest: scenario suite: %w", err)
	}
	if s.HistoryDays[0] < 1 || s.HistoryDays[1] < s.HistoryDays[0] || s.HistoryDays[1] > maxSuiteDays {
		return nil, fmt.Errorf("backtest: scenario suite: history_days %v: want 1 ≤ low ≤ high ≤ %d", s.HistoryDays, maxSuiteDays)
	}
	if s.EvalDays[0] < 1 || s.EvalDays[1] < s.EvalDays[0] || s.EvalDays[1] > maxSuiteDays {
		return nil, fmt.Errorf("backtest: scenario suite: eval_days %v: want 1 ≤ low ≤ high ≤ %d", s.EvalDays, maxSuiteDays)
	}
	if len(s.Families) == 0 {
		return nil, errors.New("backtest: scenario suite: no families")
	}
	seen := map[string]bool{}
	for i := range s.Families {
		f := &s.Families[i]
		if f.Name == "" || seen[f.Name] {
			return nil, fmt.Errorf("backtest: scenario suite: family %d: name %q missing or repeated", i, f.Name)
		}
		seen[f.Name] = true
		g, ok := generatorOf(f.Kind)
		if !ok {
			return nil, fmt.Errorf("backtest: family %s: unknown kind %q", f.Name, f.Kind)
		}
		for _, p := range g.params {
			r, ok := f.Params[p]
			if !ok {
				return nil, fmt.Errorf("backtest: family %s: parameter %q missing", f.Name, p)
			}
			if math.IsNaN(r[0]) || math.IsNaN(r[1]) || r[1] < r[0] {
				return nil, fmt.Errorf("backtest: family %s: parameter %q: range %v is not [low, high]", f.Name, p, r)
			}
			if b := paramBounds(p); r[0] < b[0] || r[1] > b[1] {
				return nil, fmt.Errorf("backtest: family %s: parameter %q: range %v outside [%g, %g]", f.Name, p, r, b[0], b[1])
			}
		}
		for p := range f.Params {
			if !g.has(p) {
				return nil, fmt.Errorf("backtest: family %s: unknown parameter %q for kind %s", f.Name, p, f.Kind)
			}
		}
		if f.Variants < 0 || f.Variants > MaxVariants {
			return nil, fmt.Errorf("backtest: family %s: variants %d outside [0, %d]", f.Name, f.Variants, MaxVariants)
		}
	}
	return &s, nil
}

// LoadSuite reads a scenario suite file.
func LoadSuite(path string) (*Suite, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("backtest: %w", err)
	}
	defer f.Close()
	return ReadSuite(f)
}

// Generate makes the suite's series from seed: variants per family, or
// each family's own count when variants is 0. The same seed gives the
// same series; each series has its own stream, so a family's series do
// not change when other families or counts change.
func (s *Suite) Generate(seed uint64, variants int) []*Series {
	var out []*Series
	for fi := range s.Families {
		f := &s.Families[fi]
		n := f.Variants
		if variants > 0 {
			n = variants
		}
		g, _ := generatorOf(f.Kind)
		for v := range n {
			rng := rand.New(rand.NewPCG(seed, hashName(f.Name)^uint64(v)*0x9e3779b97f4a7c15))
			out = append(out, s.one(f, g, v, rng))
		}
	}
	return out
}

func hashName(s string) uint64 {
	h := uint64(14695981039346656037) // FNV-1a offset basis (common practice)
	for i := 0; i < len(s); i++ {
		h ^= uint64(s[i])
		h *= 1099511628211
	}
	return h
}

// draw is a family's parameters for one variant.
type draw struct {
	f   *Family
	rng *rand.Rand
}

// p draws parameter name uniformly from its range.
func (d draw) p(name string) float64 {
	r := d.f.Params[name]
	return r[0] + d.rng.Float64()*(r[1]-r[0])
}

// scene is the frame of one invented series: one point a minute from
// start for n minutes, scored from minute eval on.
type scene struct {
	d        draw
	start    int64 // unix ms
	n, eval  int   // minutes
	sig, obs []float64
	tr       Truth
}

func (s *Suite) one(f *Family, g generator, v int, rng *rand.Rand) *Series {
	hist := s.HistoryDays[0] + rng.IntN(s.HistoryDays[1]-s.HistoryDays[0]+1)
	eval := s.EvalDays[0] + rng.IntN(s.EvalDays[1]-s.EvalDays[0]+1)
	// Start somewhere in 2026, on a random minute, so that phases of days
	// and weeks differ between variants.
	base := time.Date(2026, 1, 1, 0, 0, 0, 0, time.UTC).UnixMilli()
	start := base + int64(rng.IntN(300*24*60))*60_000
	sc := &scene{d: draw{f, rng}, start: start, n: (hist + eval) * 1440, eval: hist * 1440}
	sc.sig = make([]float64, sc.n)
	sc.obs = make([]float64, sc.n)
	sc.tr.HasRule = true
	sc.tr.Direction = forecast.Above
	g.gen(sc)
	ser := &Series{
		Name:     fmt.Sprintf("%s/%03d", f.Name, v),
		Family:   f.Name,
		Step:     time.Minute,
		T:        make([]int64, sc.n),
		V:        sc.obs,
		Signal:   sc.sig,
		EvalFrom: sc.at(sc.eval),
		Truth:    &sc.tr,
	}
	for i := range ser.T {
		ser.T[i] = sc.at(i)
	}
	if sc.tr.HasRule && sc.tr.Crossing == 0 {
		sc.tr.Crossing = firstCrossing(ser, sc.tr.Threshold, sc.tr.Direction)
	}
	return ser
}

// at is the time of minute i.
func (sc *scene) at(i int) int64 { return sc.start + int64(i)*60_000 }

// minuteIn returns a minute at fraction u of the scored days, u drawn
// from parameter name (negative values fall in the history).
func (sc *scene) minuteIn(name string) int {
	u := sc.d.p(name)
	m := sc.eval + int(u*float64(sc.n-sc.eval))
	return min(max(m, 0), sc.n-1)
}

// noise is Gaussian with standard deviation sd, plus with probability
// rate a heavy-tailed excursion of 4 to about 12 SDs either way.
func (sc *scene) noise(sd, rate float64) float64 {
	rng := sc.d.rng
	e := sd * rng.NormFloat64()
	if rate > 0 && rng.Float64() < rate {
		x := sd * (4 + 4*rng.ExpFloat64())
		if rng.IntN(2) == 0 {
			x = -x
		}
		e += x
	}
	return e
}

// firstCrossing is the time of the first signal sample on the breach side
// of threshold, 0 if none.
func firstCrossing(s *Series, thr float64, dir forecast.Direction) int64 {
	for i, y := range s.Signal {
		if (dir == forecast.Above && y >= thr) || (dir == forecast.Below && y <= thr) {
			return s.T[i]
		}
	}
	return 0
}

func clamp01(x float64) float64 { return min(max(x, 0), 1) }
