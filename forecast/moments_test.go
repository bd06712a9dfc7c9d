package forecast

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/stat"
)

func TestMomentsAgainstGonum(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	for _, weighted := range []bool{false, true} {
		for trial := range 20 {
			n := 3 + trial*7
			x, y, w := make([]float64, n), make([]float64, n), make([]float64, n)
			var m moments
			for i := range n {
				x[i] = -300 + 300*rng.Float64()
				y[i] = 2 - 0.01*x[i] + rng.NormFloat64()
				w[i] = 1
				if weighted {
					w[i] = 0.1 + rng.Float64()*3
				}
				m.add(x[i], y[i], w[i])
			}
			ww := w
			if !weighted {
				ww = nil
			}
			alpha, beta := stat.LinearRegression(x, y, ww, false) // gonum stat.LinearRegression
			xm, ym, b, _ := m.line()
			if math.Abs(b-beta) > 1e-10*math.Abs(beta) || math.Abs(ym-b*xm-alpha) > 1e-10*math.Abs(alpha) {
				t.Errorf("weighted %v n=%d: %v + %v x, gonum %v + %v x", weighted, n, ym-b*xm, b, alpha, beta)
			}
			// rss from the moments equals the residual sum of squares.
			rss := 0.0
			for i := range n {
				r := y[i] - alpha - beta*x[i]
				rss += w[i] * r * r
			}
			if math.Abs(m.rss()-rss) > 1e-8*rss {
				t.Errorf("rss %v, direct %v", m.rss(), rss)
			}
		}
	}
	// Degenerate: one x value is a level alone.
	var m moments
	m.add(1, 2, 1)
	m.add(1, 4, 1)
	if _, ym, b, _ := m.line(); b != 0 || ym != 3 || m.rss() != 2 {
		t.Errorf("degenerate: ym %v b %v rss %v", ym, b, m.rss())
	}
	if (&moments{}).rss() != 0 {
		t.Error("empty rss")
	}
}
