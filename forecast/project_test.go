package forecast

import (
	"math"
	"math/rand/v2"
	"testing"
	"time"
)

// bruteProb is the breach probability by a dense search.
func bruteProb(f *Forecast, r *Rule) float64 {
	best := 0.0
	h := r.Horizon.Seconds()
	for i := 0; i <= 200000; i++ {
		dt := h * float64(i) / 200000
		p := 1 - f.cdf(dt, r.Threshold)
		if r.Direction == Below {
			p = f.cdf(dt, r.Threshold)
		}
		best = max(best, p)
	}
	return best
}

// bruteFirst is the first dt on a fine grid where the p-quantile is beyond.
func bruteFirst(f *Forecast, r *Rule, p, span float64) (float64, bool) {
	for i := 0; i <= 100000; i++ {
		dt := span * float64(i) / 100000
		if float64(r.Direction)*(f.Quantile(dt, p)-r.Threshold) >= 0 {
			return dt, true
		}
	}
	return 0, false
}

func TestProject(t *testing.T) {
	base := Forecast{Origin: 5_000_000, Level: 0.7, Slope: 0.1 / 86400, Sigma: 0.02, VarLevel: 1e-4, CovLevelSlope: -1e-10, VarSlope: 1e-13, ScaleLower: 1, ScaleUpper: 1}
	tests := []struct {
		name  string
		edit  func(*Forecast)
		th    float64
		dir   Direction
		eta   float64 // hours after the origin, -1 for none
		early bool    // Early expected
		late  bool
	}{
		{"rising toward", nil, 0.9, Above, 48, true, true},
		{"already above", nil, 0.6, Above, 0, true, true},
		{"falling away", func(f *Forecast) { f.Slope = -f.Slope }, 0.9, Above, -1, false, false},
		{"falling away, band reaches", func(f *Forecast) { f.Slope = -f.Slope; f.VarSlope = 1e-11 }, 0.9, Above, -1, true, false},
		{"below, falling", func(f *Forecast) { f.Slope = -f.Slope }, 0.5, Below, 48, true, true},
		{"below, rising", nil, 0.5, Below, -1, false, false},
		{"flat far", func(f *Forecast) { f.Slope, f.VarSlope, f.CovLevelSlope = 0, 0, 0 }, 0.9, Above, -1, false, false},
		{"beyond the search span", func(f *Forecast) { f.Slope /= 10 }, 0.9, Above, -1, false, false},
		{"asymmetric scale", func(f *Forecast) { f.ScaleUpper = 3 }, 0.9, Above, 48, true, true},
		{"transition", func(f *Forecast) { f.Transition = 0.01 }, 0.9, Above, 48, true, true},
		{"no noise", func(f *Forecast) { f.Sigma, f.VarLevel, f.CovLevelSlope, f.VarSlope = 0, 0, 0, 0 }, 0.9, Above, 48, true, true},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			f := base
			if tc.edit != nil {
				tc.edit(&f)
			}
			r := Rule{Threshold: tc.th, Direction: tc.dir, Horizon: 24 * time.Hour}
			p := Project(&f, &r)
			if want := bruteProb(&f, &r); math.Abs(p.Probability-want) > 1e-6 {
				t.Errorf("probability %v, dense search %v", p.Probability, want)
			}
			switch {
			case tc.eta < 0 && p.ETA != 0:
				t.Errorf("ETA %d, want none", p.ETA)
			case tc.eta >= 0 && math.Abs(float64(p.ETA-f.Origin)/3.6e6-tc.eta) > 1e-6:
				t.Errorf("ETA in %v h, want %v", float64(p.ETA-f.Origin)/3.6e6, tc.eta)
			}
			span := 4 * r.Horizon.Seconds()
			near, far := 0.9, 0.1
			if tc.dir == Below {
				near, far = 0.1, 0.9
			}
			check := func(what string, got int64, p float64, want bool) {
				dt, ok := bruteFirst(&f, &r, p, span)
				if ok != want {
					t.Errorf("%s: brute force found a crossing: %v, want %v", what, ok, want)
				}
				if !ok {
					if got != 0 {
						t.Errorf("%s = %d, want none", what, got)
					}
					return
				}
				if math.Abs(float64(got-f.Origin)/1000-dt) > span/100000+1e-3 {
					t.Errorf("%s in %v s, dense search %v s", what, float64(got-f.Origin)/1000, dt)
				}
			}
			check("early", p.Early, near, tc.early)
			check("late", p.Late, far, tc.late)
			if p.Early != 0 && p.Late != 0 && p.Early > p.Late {
				t.Errorf("early %d after late %d", p.Early, p.Late)
			}
		})
	}
}

// An interior maximum: the mean turns back toward the threshold only
// through the widening band.
func TestProjectInteriorMaximum(t *testing.T) {
	f := Forecast{Level: 0.8, Slope: -1e-6, Sigma: 0.01, VarSlope: 1e-12, ScaleLower: 1, ScaleUpper: 1}
	r := Rule{Threshold: 0.85, Direction: Above, Horizon: 24 * time.Hour}
	p := Project(&f, &r)
	if want := bruteProb(&f, &r); math.Abs(p.Probability-want) > 1e-7 {
		t.Errorf("probability %v, dense search %v", p.Probability, want)
	}
}

func TestProjectInvalid(t *testing.T) {
	f := testForecast()
	for _, r := range []*Rule{nil, {Threshold: 1, Direction: 0}, {Threshold: 1, Direction: 7}} {
		if p := Project(&f, r); p != (Projection{}) {
			t.Errorf("rule %+v: %+v", r, p)
		}
	}
	if p := Project(nil, &Rule{Direction: Above}); p != (Projection{}) {
		t.Errorf("nil forecast: %+v", p)
	}
	// Zero horizon takes the default; NaN fields give no probability.
	r := Rule{Threshold: 11, Direction: Above}
	if p := Project(&f, &r); p.Probability <= 0 {
		t.Errorf("zero horizon: %+v", p)
	}
	g := f
	g.Level = math.NaN()
	if p := Project(&g, &r); p.Probability != 0 || p.ETA != 0 {
		t.Errorf("NaN level: %+v", p)
	}
}

// TestOutBound checks the O(1) bound that lets crossing skip its scan: on
// random forecasts (invented), whenever it says the bound stays short of
// the threshold, a dense scan agrees.
func TestOutBound(t *testing.T) {
	r := rand.New(rand.NewPCG(3, 4))
	skipped := 0
	for range 2000 {
		f := Forecast{
			Level: r.NormFloat64(), Slope: r.NormFloat64() / 86400, Sigma: 0.1 + r.Float64(),
			VarLevel: r.Float64() * 0.1, VarSlope: r.Float64() * 1e-10, Persist: r.Float64() * 1e-10, Age: r.Float64() * 86400,
			ScaleLower: 0.5 + r.Float64(), FarUpper: 0.5 + 2*r.Float64(), NearAt: 3600, FarAt: 21600,
		}
		if r.IntN(2) == 0 {
			f.Season = []float64{r.NormFloat64(), r.NormFloat64(), r.NormFloat64(), r.NormFloat64()}
			f.SeasonStep = 6 * 3600
		}
		for _, d := range []Direction{Above, Below} {
			o := outlook{f: &f, d: float64(d), th: 4 * r.NormFloat64()}
			for _, z := range []float64{0, z80, -z80} {
				if !o.out(z, 4*86400) {
					continue
				}
				skipped++
				for i := 0; i <= 4000; i++ {
					dt := 4 * 86400 * float64(i) / 4000
					q := f.Mean(dt) + z*math.Sqrt(f.Var(dt))*f.scale(z > 0, dt)
					if o.d*(q-o.th) >= 0 {
						t.Fatalf("bound says no crossing, yet the bound %v crosses %v at %v: %+v", z, o.th, dt, f)
					}
				}
			}
		}
	}
	if skipped == 0 {
		t.Fatal("the bound never applied")
	}
}
