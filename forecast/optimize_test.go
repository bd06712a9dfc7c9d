package forecast

import (
	"math"
	"testing"
)

// The minima below are analytic (common practice): Rosenbrock's function
// has its minimum 0 at (1, 1); a separable quadratic outside the box is
// minimised at the nearest point of the box.
func TestNelderMead(t *testing.T) {
	rosen := func(q []float64) float64 {
		a, b := 1-q[0], q[1]-q[0]*q[0]
		return a*a + 100*b*b
	}
	bowl := func(c ...float64) func([]float64) float64 {
		return func(q []float64) float64 {
			s := 0.0
			for k, v := range q {
				s += (v - c[k]) * (v - c[k])
			}
			return s
		}
	}
	cases := []struct {
		name   string
		f      func([]float64) float64
		x0     []float64
		lo, hi []float64
		want   []float64
		fwant  float64
		tol    float64
	}{
		{"rosenbrock", rosen, []float64{-1.2, 1}, []float64{-2, -2}, []float64{2, 2}, []float64{1, 1}, 0, 1e-5},
		{"minimum outside the box", bowl(3, -1), []float64{0.3, 0.1}, []float64{0, 0}, []float64{1, 1}, []float64{1, 0}, 5, 1e-7},
		{"on a face", bowl(0.5, 2), []float64{0.3, 0.1}, []float64{0, 0}, []float64{1, 1}, []float64{0.5, 1}, 1, 1e-7},
		{"fixed coordinate", bowl(1, 2), []float64{0, 0.5}, []float64{-5, 0.5}, []float64{5, 0.5}, []float64{1, 0.5}, 2.25, 1e-7},
		{"one dimension", bowl(0.25), []float64{0.9}, []float64{0}, []float64{1}, []float64{0.25}, 0, 1e-7},
		{"three dimensions", bowl(0.2, 0.7, 0.01), []float64{0.3, 0.1, 0.1}, []float64{0, 0, 0}, []float64{1, 1, 1}, []float64{0.2, 0.7, 0.01}, 0, 1e-7},
		{"start outside the box", bowl(0.4, 0.6), []float64{7, -3}, []float64{0, 0}, []float64{1, 1}, []float64{0.4, 0.6}, 0, 1e-7},
		{"NaN beyond 0.8", func(q []float64) float64 {
			if q[0] > 0.8 {
				return math.NaN()
			}
			return bowl(0.7, 0)(q)
		}, []float64{0.75, 0.5}, []float64{0, 0}, []float64{1, 1}, []float64{0.7, 0}, 0, 1e-7},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			x, fx, evals := nelderMead(c.f, c.x0, c.lo, c.hi, nmConfig{})
			for k := range x {
				if math.Abs(x[k]-c.want[k]) > c.tol {
					t.Errorf("x = %v, want %v", x, c.want)
					break
				}
			}
			if math.Abs(fx-c.fwant) > c.tol {
				t.Errorf("f = %v, want %v", fx, c.fwant)
			}
			for k := range x {
				if x[k] < c.lo[k] || x[k] > c.hi[k] {
					t.Errorf("x = %v outside the box", x)
				}
			}
			t.Logf("%d evaluations", evals)
		})
	}
}

func TestNelderMeadLimits(t *testing.T) {
	calls := 0
	f := func(q []float64) float64 { calls++; return q[0]*q[0] + q[1]*q[1] }
	_, _, evals := nelderMead(f, []float64{0.5, 0.5}, []float64{-1, -1}, []float64{1, 1}, nmConfig{MaxEval: 20})
	// A step evaluates at most d+1 points past the limit (a shrink).
	if evals != calls || evals > 20+3 {
		t.Errorf("%d evaluations (%d calls), limit 20", evals, calls)
	}
	for _, c := range []struct {
		name       string
		x0, lo, hi []float64
	}{
		{"empty", nil, nil, nil},
		{"lo too short", []float64{1, 2}, []float64{0}, []float64{3, 3}},
		{"hi too long", []float64{1}, []float64{0}, []float64{3, 3}},
		{"lo above hi", []float64{1}, []float64{2}, []float64{0}},
		{"nan bound", []float64{1}, []float64{math.NaN()}, []float64{2}},
		{"infinite width", []float64{1}, []float64{0}, []float64{math.Inf(1)}},
	} {
		x, fx, _ := nelderMead(func(q []float64) float64 { return 0 }, c.x0, c.lo, c.hi, nmConfig{})
		if !math.IsNaN(fx) || len(x) != len(c.x0) {
			t.Errorf("%s: %v, %v; want x0 and NaN", c.name, x, fx)
		}
	}
}
