package forecast

import (
	"math"
	"testing"
)

// On invented stationary noise the 80 % and 95 % bands cover about 80 %
// and 95 % of future minute buckets, near and far.
func TestBandCoverage(t *testing.T) {
	const hist, runs = 2 * 1440, 300
	aheads := []int{1, 5, 30, 120, 600, 1440} // minutes
	var in80, in95, total int
	for seed := range uint64(runs) {
		s := newSeries(hist+1440, 1, seed+100, func(int) float64 { return 10 })
		f, ok := s.fitAt(hist-1, Incline{})
		if !ok {
			t.Fatal("fit failed")
		}
		for _, a := range aheads {
			y := s.v[hist-1+a]
			dt := float64(a) * 60
			lo, hi := f.Band(dt, 0.8)
			lo95, hi95 := f.Band(dt, 0.95)
			total++
			if lo <= y && y <= hi {
				in80++
			}
			if lo95 <= y && y <= hi95 {
				in95++
			}
		}
	}
	c80, c95 := float64(in80)/float64(total), float64(in95)/float64(total)
	t.Logf("coverage over %d forecasts: 80 %% band %.3f, 95 %% band %.3f", total, c80, c95)
	if c80 < 0.72 || c80 > 0.88 {
		t.Errorf("80 %% band covers %.3f", c80)
	}
	if c95 < 0.91 || c95 > 0.985 {
		t.Errorf("95 %% band covers %.3f", c95)
	}
}

// The same on a trend: the band is not bought by a biased mean.
func TestBandCoverageTrend(t *testing.T) {
	const hist, runs = 3 * 1440, 150
	var in80, total int
	var bias float64
	for seed := range uint64(runs) {
		s := newSeries(hist+1440, 0.5, seed+900, func(i int) float64 { return 100 + 0.002*float64(i) })
		f, _ := s.fitAt(hist-1, Incline{})
		for _, a := range []int{10, 240, 1440} {
			y := s.v[hist-1+a]
			lo, hi := f.Band(float64(a)*60, 0.8)
			total++
			if lo <= y && y <= hi {
				in80++
			}
			bias += (y - f.Mean(float64(a)*60)) / math.Sqrt(f.Var(float64(a)*60))
		}
	}
	c80 := float64(in80) / float64(total)
	t.Logf("trend: 80 %% band covers %.3f, mean standardized error %.3f", c80, bias/float64(total))
	if c80 < 0.72 || c80 > 0.88 {
		t.Errorf("80 %% band covers %.3f", c80)
	}
}
