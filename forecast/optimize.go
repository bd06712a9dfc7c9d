package forecast

import "math"

// nmConfig tunes nelderMead. Zero fields take the defaults.
type nmConfig struct {
	// Step is the edge of the starting simplex as a fraction of each
	// coordinate's width hi−lo (default 0.1).
	Step float64
	// TolF is the relative spread of the simplex values below which a
	// run has converged (default 1e-12; ftol adds a floor), and the
	// relative gain below which a restart is not worth another.
	TolF float64
	// TolX is the largest distance of a vertex from the best one, as a
	// fraction of the width, below which a run has converged (default 1e-9).
	TolX float64
	// MaxEval bounds the evaluations of f over all restarts
	// (default 400·(d+1)²).
	MaxEval int
	// Restarts bounds the fresh simplices built around the best point after
	// a run converges (default 8).
	Restarts int
}

func (c nmConfig) withDefaults(d int) nmConfig {
	if !(c.Step > 0) {
		c.Step = 0.1
	}
	if !(c.TolF > 0) {
		c.TolF = 1e-12
	}
	if !(c.TolX > 0) {
		c.TolX = 1e-9
	}
	if c.MaxEval <= 0 {
		c.MaxEval = 400 * (d + 1) * (d + 1)
	}
	if c.Restarts <= 0 {
		c.Restarts = 8
	}
	return c
}

// nelderMead minimises f over the box lo ≤ x ≤ hi from x0 with the simplex
// method of Nelder and Mead (1965), with the usual coefficients (reflection
// 1, expansion 2, contraction ½, shrink ½; Lagarias et al. 1998).
//
// The box is handled by an exact penalty rather than by clamping trial
// points: a point outside is worth f at its projection onto the box plus
// c times its distance from the box (in widths, c = |f(x0)|). Every point
// outside is worse than its projection, so the minimisers are those of f on
// the box, while the simplex keeps its volume across a face; clamped points
// would flatten it onto the face and stop it short of a minimum just
// inside, such as a smoothing parameter near 0. A simplex can still stall,
// so after a run converges it restarts around the best point until a
// restart no longer gains (the restart check of O'Neill 1971, AS 47). A NaN
// value of f counts as +Inf.
//
// It returns the best point, which lies in the box, its value and the
// evaluations of f spent. With mismatched lengths or bounds that are not
// finite and ordered it returns x0 unchanged and NaN.
func nelderMead(f func([]float64) float64, x0, lo, hi []float64, cfg nmConfig) ([]float64, float64, int) {
	d := len(x0)
	best := append([]float64(nil), x0...)
	if len(lo) != d || len(hi) != d || d == 0 {
		return best, math.NaN(), 0
	}
	width := make([]float64, d)
	for k := range d {
		if !(lo[k] <= hi[k]) || math.IsInf(hi[k]-lo[k], 0) {
			return best, math.NaN(), 0
		}
		width[k] = hi[k] - lo[k]
	}
	cfg = cfg.withDefaults(d)
	nm := nmSimplex{f: f, lo: lo, hi: hi, width: width, cfg: cfg, px: make([]float64, d), penalty: 1}
	nm.project(best, best)
	fbest := nm.eval(best)
	if a := math.Abs(fbest); a > 0 && !math.IsInf(a, 0) {
		nm.penalty = a
	}
	for r := 0; r <= cfg.Restarts && nm.evals < cfg.MaxEval; r++ {
		x, fx := nm.run(best, fbest)
		gain := fbest - fx
		if fx < fbest {
			copy(best, x)
			fbest = fx
		}
		if r > 0 && !(gain > nm.ftol(fbest)) {
			break
		}
	}
	return best, fbest, nm.evals
}

// nmSimplex is the working state of nelderMead.
type nmSimplex struct {
	f         func([]float64) float64
	lo, hi    []float64
	width     []float64
	cfg       nmConfig
	penalty   float64 // c: value per width of distance outside the box
	evals     int
	v         [][]float64 // vertices, kept sorted by value after each step
	fv        []float64
	c, xr, xe []float64 // centroid and trial points
	px        []float64 // projection of a point onto the box
}

// eval is f at x, penalised by the distance of x from the box.
func (s *nmSimplex) eval(x []float64) float64 {
	dist := s.project(s.px, x)
	s.evals++
	v := s.f(s.px)
	if math.IsNaN(v) {
		return math.Inf(1)
	}
	return v + s.penalty*dist
}

// project sets dst to the point of the box nearest to x and returns the
// distance in widths (L1; a fixed coordinate counts its distance as is).
func (s *nmSimplex) project(dst, x []float64) float64 {
	dist := 0.0
	for k, v := range x {
		p := min(max(v, s.lo[k]), s.hi[k])
		if p != v {
			w := s.width[k]
			if !(w > 0) {
				w = 1
			}
			dist += math.Abs(v-p) / w
		}
		dst[k] = p
	}
	return dist
}

// run is one Nelder–Mead run from a fresh simplex around x0 (value f0).
func (s *nmSimplex) run(x0 []float64, f0 float64) ([]float64, float64) {
	d := len(x0)
	if s.v == nil {
		s.v = make([][]float64, d+1)
		for i := range s.v {
			s.v[i] = make([]float64, d)
		}
		s.fv = make([]float64, d+1)
		s.c, s.xr, s.xe = make([]float64, d), make([]float64, d), make([]float64, d)
	}
	copy(s.v[0], x0)
	s.fv[0] = f0
	for i := 1; i <= d; i++ {
		v := s.v[i]
		copy(v, x0)
		k := i - 1
		h := s.cfg.Step * s.width[k]
		// Step inward when the outward step would leave the box.
		if v[k]+h > s.hi[k] {
			h = -h
		}
		v[k] += h
		s.fv[i] = s.eval(v)
	}
	for s.evals < s.cfg.MaxEval {
		s.sort()
		if s.converged() {
			break
		}
		s.step()
	}
	s.sort()
	// The best vertex may lie outside the box; its projection is better.
	if s.project(s.px, s.v[0]) > 0 {
		copy(s.v[0], s.px)
		s.fv[0] = s.eval(s.v[0])
	}
	return s.v[0], s.fv[0]
}

// sort orders the vertices by value (insertion sort: d is small).
func (s *nmSimplex) sort() {
	for i := 1; i < len(s.fv); i++ {
		for j := i; j > 0 && s.fv[j] < s.fv[j-1]; j-- {
			s.fv[j], s.fv[j-1] = s.fv[j-1], s.fv[j]
			s.v[j], s.v[j-1] = s.v[j-1], s.v[j]
		}
	}
}

func (s *nmSimplex) converged() bool {
	n := len(s.fv) - 1
	if !(s.fv[n]-s.fv[0] <= s.ftol(s.fv[0])) {
		return false
	}
	for i := 1; i <= n; i++ {
		for k, b := range s.v[0] {
			if math.Abs(s.v[i][k]-b) > s.cfg.TolX*s.width[k] {
				return false
			}
		}
	}
	return true
}

// ftol is the spread of values that counts as none near the value f: TolF
// relative to f, but at least what a smooth function of the scale of
// f(x0) varies by across TolX, so that a minimum value of 0 is reached too.
func (s *nmSimplex) ftol(f float64) float64 {
	return max(s.cfg.TolF*math.Abs(f), s.penalty*s.cfg.TolX*s.cfg.TolX)
}

// step replaces the worst vertex, or shrinks the simplex towards the best.
func (s *nmSimplex) step() {
	n := len(s.fv) - 1
	for k := range s.c {
		sum := 0.0
		for i := 0; i < n; i++ {
			sum += s.v[i][k]
		}
		s.c[k] = sum / float64(n)
	}
	s.along(s.xr, -1)
	fr := s.eval(s.xr)
	switch {
	case fr < s.fv[0]:
		s.along(s.xe, -2)
		if fe := s.eval(s.xe); fe < fr {
			s.accept(s.xe, fe)
		} else {
			s.accept(s.xr, fr)
		}
	case fr < s.fv[n-1]:
		s.accept(s.xr, fr)
	default:
		// Contract on the better side of the centroid: outside towards
		// the reflected point, inside towards the worst vertex.
		t, ft := -0.5, fr
		if fr >= s.fv[n] {
			t, ft = 0.5, s.fv[n]
		}
		s.along(s.xe, t)
		if fc := s.eval(s.xe); fc < ft || (t < 0 && fc <= ft) {
			s.accept(s.xe, fc)
			return
		}
		for i := 1; i <= n; i++ {
			for k, b := range s.v[0] {
				s.v[i][k] = b + 0.5*(s.v[i][k]-b)
			}
			s.fv[i] = s.eval(s.v[i])
		}
	}
}

// along sets dst to c + t·(w − c), w the worst vertex.
func (s *nmSimplex) along(dst []float64, t float64) {
	w := s.v[len(s.v)-1]
	for k, c := range s.c {
		dst[k] = c + t*(w[k]-c)
	}
}

// accept replaces the worst vertex by x with value fx.
func (s *nmSimplex) accept(x []float64, fx float64) {
	n := len(s.fv) - 1
	copy(s.v[n], x)
	s.fv[n] = fx
}
