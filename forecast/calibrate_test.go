package forecast

import (
	"math"
	"math/rand/v2"
	"testing"

	"github.com/headroom-dev/headroom/state"
)

// TestCalibrationConverges drives Calibration.Apply with a forecast that
// claims unit noise while the values (invented, scenario data) come from
// another distribution, and checks that the scales settle where the bands
// cover at their nominal rates on each side.
func TestCalibrationConverges(t *testing.T) {
	const minute = int64(60_000)
	tests := []struct {
		name      string
		draw      func(r *rand.Rand) float64
		lowOverUp float64 // least ratio of mean lower to mean upper 80 % scale
		upOverLow float64 // and the other way
		meanScale [2]float64
	}{
		{"too narrow", func(r *rand.Rand) float64 { return 2 * r.NormFloat64() }, 0.7, 0.7, [2]float64{1.6, 2.5}},
		{"too wide", func(r *rand.Rand) float64 { return 0.6 * r.NormFloat64() }, 0.7, 0.7, [2]float64{0.45, 0.8}},
		// A series that drops often: the lower tail three times longer.
		{"drops", func(r *rand.Rand) float64 {
			z := r.NormFloat64()
			if z < 0 {
				z *= 3
			}
			return z
		}, 2, 0, [2]float64{0.7, 3.5}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			r := rand.New(rand.NewPCG(1, 2))
			var cs state.Calibration
			var c Calibration
			v := state.View{Levels: []state.LevelView{{Width: minute}}}
			ys := make([]float64, 120)
			var f Forecast
			// Evaluate every 10 minutes for 120 days; from day 30 on,
			// count how often fresh values fall in the bands in force.
			var n, in80, in95 float64
			var sumLo, sumUp float64
			start := int64(3 * 60 * minute)
			for end := start; end < 120*24*60*minute; end += 10 * minute {
				v.End = end
				v.Levels[0].Start = end - 120*minute
				for i := range ys {
					ys[i] = tc.draw(r)
				}
				v.Levels[0].Y = ys
				f = Forecast{Origin: end, Sigma: 1}
				c.Apply(&cs, &v, &f)
				if end < 30*24*60*minute {
					continue
				}
				y := tc.draw(r)
				lo80, hi80 := f.Band(0, 0.8)
				lo95, hi95 := f.Band(0, 0.95)
				n++
				if y >= lo80 && y <= hi80 {
					in80++
				}
				if y >= lo95 && y <= hi95 {
					in95++
				}
				sumLo += f.ScaleLower
				sumUp += f.ScaleUpper
			}
			cov80, cov95 := in80/n, in95/n
			t.Logf("coverage 80 %.3f, 95 %.3f; mean scales lower %.3f upper %.3f; %d checks", cov80, cov95, sumLo/n, sumUp/n, cs.Seen)
			if cov80 < 0.75 || cov80 > 0.85 || cov95 < 0.93 || cov95 > 0.97 {
				t.Errorf("coverage 80 %.3f, 95 %.3f: want about 0.80 and 0.95", cov80, cov95)
			}
			lo, up := sumLo/n, sumUp/n
			if lo < tc.lowOverUp*up || up < tc.upOverLow*lo {
				t.Errorf("mean scales lower %.3f, upper %.3f", lo, up)
			}
			if m := (lo + up) / 2; m < tc.meanScale[0] || m > tc.meanScale[1] {
				t.Errorf("mean scale %.3f, want in %v", m, tc.meanScale)
			}
		})
	}
}

// TestCalibrationLostChecks: a check whose value the view no longer holds,
// or whose bucket is empty, is dropped without moving the scales.
func TestCalibrationLostChecks(t *testing.T) {
	const minute = int64(60_000)
	var cs state.Calibration
	v := state.View{End: 1000 * minute, Levels: []state.LevelView{{Width: minute, Start: 880 * minute, Y: make([]float64, 120)}}}
	for i := range v.Levels[0].Y {
		v.Levels[0].Y[i] = math.NaN()
	}
	f := Forecast{Origin: v.End, Sigma: 1}
	Calibration{}.Apply(&cs, &v, &f)
	if cs.Due[0] != v.End+60*minute || cs.Due[1] != v.End+360*minute {
		t.Fatalf("due %v", cs.Due)
	}
	// Ten hours later: both due, both gone from the finest level.
	v.End += 600 * minute
	v.Levels[0].Start += 600 * minute
	Calibration{}.Apply(&cs, &v, &f)
	if cs.Seen != 0 || cs.Scale != [6]float32{} {
		t.Errorf("seen %d, scales %v: want nothing scored", cs.Seen, cs.Scale)
	}
	if f.ScaleLower != 1 || f.FarUpper != 1 || f.TailUpper != 1 {
		t.Errorf("scales %v %v %v, want 1", f.ScaleLower, f.FarUpper, f.TailUpper)
	}
}
