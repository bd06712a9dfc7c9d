package forecast

import (
	"math"
	"math/rand/v2"
	"testing"
	"time"

	"github.com/headroom-dev/headroom/state"
)

// TestHostileViews feeds the whole evaluation path (engine choice, fit,
// calibration, points, projection) views no store would make: NaN,
// infinities, huge and tiny values, zero and negative weights, times out
// of order, empty and ragged levels (invented data). Nothing may panic, and
// whatever a fit returns must be finite.
func TestHostileViews(t *testing.T) {
	r := rand.New(rand.NewPCG(11, 12))
	pick := func() float64 {
		switch r.IntN(40) {
		case 0:
			return math.NaN()
		case 1:
			return math.Inf(1 - 2*r.IntN(2))
		case 2:
			return 1e300 * r.NormFloat64()
		case 3:
			return 1e-300 * r.NormFloat64()
		case 4:
			return 0
		default:
			return 100 + 10*r.NormFloat64()
		}
	}
	sc := NewScratch()
	var cal state.Calibration
	var pts []Point
	rule := Rule{Threshold: 150, Direction: Above, Horizon: 24 * time.Hour}
	rule.Defaults()
	fits := map[string]int{}
	for iter := range 3000 {
		n := r.IntN(600)
		v := state.View{End: 1_800_000_000_000 + int64(iter)*60_000}
		for i := range n {
			t := -float64(n-i) * 60
			if r.IntN(20) == 0 {
				t = pick()
			}
			w := 1.0 / 60
			if r.IntN(20) == 0 {
				w = pick()
			}
			v.T = append(v.T, t)
			v.Y = append(v.Y, pick())
			v.W = append(v.W, w)
			v.N = append(v.N, uint32(r.IntN(3)))
		}
		for _, width := range []int64{60_000, 900_000, 3_600_000} {
			if r.IntN(4) == 0 {
				continue
			}
			m := r.IntN(400)
			lv := state.LevelView{Width: width, Start: v.End - int64(m)*width}
			if r.IntN(10) == 0 {
				lv.Width = int64(r.IntN(3)) - 1 // zero or negative
			}
			for range m {
				y := 100 + 20*math.Sin(float64(len(lv.Y))*2*math.Pi*float64(width)/86_400_000) + r.NormFloat64()
				if r.IntN(8) == 0 {
					y = pick()
				}
				lv.Y = append(lv.Y, y)
			}
			v.Levels = append(v.Levels, lv)
		}
		var c Cycles
		e := Choose(&v, sc, &c, "")
		var f Forecast
		if !e.Fit(&v, sc, &f) {
			continue
		}
		fits[e.Name()]++
		if !f.finite() {
			t.Fatalf("iteration %d: %s returned a forecast that is not finite: %+v", iter, e.Name(), f)
		}
		Calibration{}.Apply(&cal, &v, &f)
		pts = f.Points(24*time.Hour, 12, pts[:0])
		p := Project(&f, &rule)
		if math.IsNaN(p.Probability) || p.Probability < 0 || p.Probability > 1 {
			t.Fatalf("iteration %d: probability %v", iter, p.Probability)
		}
	}
	t.Logf("fits: %v", fits)
	if fits["incline"] == 0 || fits["tide"] == 0 {
		t.Errorf("fits %v: the hostile views never reached an engine", fits)
	}
}
