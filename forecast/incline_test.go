package forecast

import (
	"math"
	"math/rand/v2"
	"testing"

	"github.com/headroom-dev/headroom/state"
)

// lineView is a view of hourly buckets on an exact line.
func lineView(n int, level, perHour float64) *state.View {
	v := &state.View{End: 1_700_000_000_000}
	for i := range n {
		tc := -float64(n-i)*3600 + 1800
		v.T = append(v.T, tc)
		v.Y = append(v.Y, level+perHour*tc/3600)
		v.W = append(v.W, 1)
		v.N = append(v.N, 60)
	}
	return v
}

func TestInclineExactLine(t *testing.T) {
	for _, tc := range []struct{ level, perHour float64 }{{5, 0.1}, {1e12, 3e6}, {-2, 0}, {0, 0}} {
		v := lineView(48, tc.level, tc.perHour)
		var f Forecast
		if !(Incline{}).Fit(v, NewScratch(), &f) {
			t.Fatalf("%+v: fit failed", tc)
		}
		tol := 1e-9 * max(1, math.Abs(tc.level))
		if math.Abs(f.Level-tc.level) > tol || math.Abs(f.Slope*3600-tc.perHour) > tol {
			t.Errorf("%+v: level %v slope/h %v", tc, f.Level, f.Slope*3600)
		}
		if f.Engine != "incline" || f.Origin != v.End || f.Support != 48 || f.ScaleLower != 1 || f.ScaleUpper != 1 {
			t.Errorf("%+v: %+v", tc, f)
		}
		if want := v.End - 48*3600_000; f.Since != want {
			t.Errorf("since %d, want %d", f.Since, want)
		}
		if f.Sigma > tol {
			t.Errorf("%+v: sigma %v on an exact line", tc, f.Sigma)
		}
	}
}

func TestInclineShort(t *testing.T) {
	var f Forecast
	e := Incline{}
	if e.Fit(nil, nil, &f) || e.Fit(&state.View{}, nil, &f) || e.Fit(lineView(4, 1, 1), nil, &f) {
		t.Error("fit on fewer than five buckets")
	}
	if !e.Fit(lineView(5, 1, 1), nil, &f) {
		t.Error("no fit on five buckets")
	}
	// Empty, non-finite and out-of-order buckets do not count.
	v := lineView(8, 1, 1)
	v.N[0], v.Y[1], v.W[2], v.T[4] = 0, math.NaN(), 0, v.T[3]
	if e.Fit(v, nil, &f) {
		t.Error("fit on four usable buckets")
	}
	if e.Fit(v, nil, nil) {
		t.Error("fit into a nil forecast")
	}
}

// Views of nonsense never panic, and a fit that succeeds is finite.
func TestInclineGarbage(t *testing.T) {
	rng := rand.New(rand.NewPCG(9, 9))
	pick := func() float64 {
		switch rng.IntN(12) {
		case 0:
			return math.NaN()
		case 1:
			return math.Inf(1 - 2*rng.IntN(2))
		case 2:
			return 0
		case 3:
			return -rng.Float64() * 1e300
		case 4:
			return rng.Float64() * 1e300
		case 5:
			return 1e-300
		default:
			return rng.NormFloat64() * 100
		}
	}
	sc := NewScratch()
	var f Forecast
	for trial := range 3000 {
		n := rng.IntN(40)
		v := &state.View{End: rng.Int64()}
		for range n {
			v.T = append(v.T, pick())
			v.Y = append(v.Y, pick())
			v.W = append(v.W, pick())
			v.N = append(v.N, uint32(rng.IntN(3)))
		}
		if trial%3 == 0 { // sorted times, the usual shape
			for i := range v.T {
				v.T[i] = -float64(n-i) * 60
			}
		}
		if trial%5 == 0 && n > 0 { // ragged lengths
			v.Y = v.Y[:rng.IntN(n)]
		}
		if (Incline{}).Fit(v, sc, &f) && !f.finite() {
			t.Fatalf("trial %d: non-finite forecast %+v", trial, f)
		}
		r := Rule{Threshold: pick(), Direction: Above}
		Project(&f, &r)
		f.Points(3600e9, 4, nil)
	}
}

// Steady state allocates nothing.
func TestInclineNoAllocs(t *testing.T) {
	v := weekView(t)
	sc := NewScratch()
	var f Forecast
	(Incline{}).Fit(v, sc, &f)
	if n := testing.AllocsPerRun(20, func() { (Incline{}).Fit(v, sc, &f) }); n != 0 {
		t.Errorf("%v allocations per Fit", n)
	}
}

// Each resolution gets its own noise: for white noise a bucket's variance
// is inversely proportional to its width.
func TestInclineGroupVariance(t *testing.T) {
	const minutes, seeds = 15 * 1440, 8
	var sum [3]float64
	for seed := range uint64(seeds) {
		s := newSeries(minutes, 0.01, seed, func(i int) float64 { return 0.3 + 0.4*float64(i)/minutes })
		var v state.View
		s.view(s.end(minutes-1), &v)
		sc := NewScratch()
		n := sc.load(&v)
		sc.standardize(n)
		if sc.ng != 3 {
			t.Fatalf("%d groups", sc.ng)
		}
		for g := range sc.ng {
			sd := sc.scale * math.Sqrt(sc.vg[g])
			want := 0.01 / math.Sqrt(60*sc.width[g]) // a mean of 60·width minutes
			sum[g] += sd / want
		}
	}
	for g, s := range sum {
		if r := s / seeds; r < 0.9 || r > 1.1 {
			t.Errorf("group %d: noise SD %.3f of the truth on average", g, r)
		}
	}
}

// The fill rate doubles: once the faster rate has held for a while it is
// the current regime.
func TestInclineSlopeChange(t *testing.T) {
	C := 5 * 1440
	rate := 0.01
	s := newSeries(C+600, 0.2, 5, func(i int) float64 {
		if i < C {
			return 10 + rate*float64(i)
		}
		return 10 + rate*float64(C) + 3*rate*float64(i-C)
	})
	f, _ := s.fitAt(C+300, Incline{})
	if got := f.Slope * 60 / rate; math.Abs(got-3) > 0.3 {
		t.Errorf("slope %.2f times the old rate, want 3", got)
	}
	if f.Since < s.end(C-30) || f.Since > s.end(C+30) {
		t.Errorf("regime since minute %d, want about %d", (f.Since-s.start)/minute, C)
	}
}

// A fresh level after a long flat stretch does not extrapolate the noise in
// its few points: the slope is shrunk toward the old (zero) slope.
func TestInclineShortRegimeShrinks(t *testing.T) {
	C := 3 * 1440
	s := newSeries(C+20, 1, 21, func(i int) float64 {
		if i < C {
			return 50
		}
		return 70
	})
	minSeg := Incline{}.params().MinSegment
	for k := minSeg; k < 20; k++ {
		f, _ := s.fitAt(C+k-1, Incline{})
		if f.Support > k {
			t.Fatalf("%d minutes at the new level: regime of %d points", k, f.Support)
		}
		// The least-squares slope of k noisy minutes is typically σ·√(12/k³)
		// per minute; after shrinkage it must be far smaller.
		ls := math.Sqrt(12/math.Pow(float64(k), 3)) / 60
		if math.Abs(f.Slope) > ls/5 {
			t.Errorf("%d minutes at the new level: slope %.3g per s, raw noise slope ≈ %.3g", k, f.Slope, ls)
		}
		if math.Abs(f.Level-70) > 2 {
			t.Errorf("%d minutes at the new level: level %.2f", k, f.Level)
		}
	}
}

// Sigma is the noise of one newest bucket: unbiased, and steady from one
// history to the next.
func TestInclineSigma(t *testing.T) {
	const minutes, seeds = 10 * 1440, 40
	var sum, sum2 float64
	for seed := range uint64(seeds) {
		s := newSeries(minutes, 0.01, seed, func(i int) float64 { return 0.3 + 0.4*float64(i)/minutes })
		f, _ := s.fitAt(minutes-1, Incline{})
		r := f.Sigma / 0.01
		sum += r
		sum2 += r * r
	}
	mean := sum / seeds
	sd := math.Sqrt((sum2 - sum*sum/seeds) / (seeds - 1))
	t.Logf("Sigma over %d histories: %.3f ± %.3f of the truth", seeds, mean, sd)
	if math.Abs(mean-1) > 0.05 || sd > 0.12 {
		t.Errorf("Sigma %.3f ± %.3f of the truth", mean, sd)
	}
}
