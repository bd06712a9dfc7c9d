package state

// Prefix holds running Sums over a sequence of observations so that the
// Sums of any range costs two subtractions. The sums are taken about the
// first x as origin (Sums.X0), which keeps the magnitudes small when x is
// far from 0; Range returns Sums carrying that origin, and their Fit
// reports lines in the caller's coordinates all the same.
//
// Differences of running sums lose about as many digits as the running sums
// outgrow the range's own: a short range late in a long sequence is less
// precise than summing it afresh with Sums.Add, by a factor of the ratio of
// the magnitudes. For sequences of a few thousand points that is far below
// the noise of any forecast.
type Prefix struct {
	p []Sums // p[i] holds observations [0, i)
}

// Build computes the running sums of the observations (x[i], y[i]) with
// weights w[i]; w nil means unit weights. Slices of unequal length are cut
// to the shortest. It reuses p's memory.
func (p *Prefix) Build(x, y, w []float64) {
	n := min(len(x), len(y))
	if w != nil {
		n = min(n, len(w))
	}
	if cap(p.p) < n+1 {
		p.p = make([]Sums, n+1)
	}
	p.p = p.p[:n+1]
	var s Sums
	if n > 0 {
		s.X0 = x[0]
	}
	p.p[0] = s
	for i := range n {
		wi := 1.0
		if w != nil {
			wi = w[i]
		}
		s.Add(x[i], y[i], wi)
		p.p[i+1] = s
	}
}

// Len returns the number of observations.
func (p *Prefix) Len() int { return max(len(p.p)-1, 0) }

// Range returns the Sums of observations [i, j). Bounds are clipped to
// [0, Len()]; an empty range gives zero sums.
func (p *Prefix) Range(i, j int) Sums {
	n := p.Len()
	i, j = min(max(i, 0), n), min(max(j, 0), n)
	if i >= j {
		var s Sums
		if len(p.p) > 0 {
			s.X0 = p.p[0].X0
		}
		return s
	}
	return p.p[j].Sub(p.p[i])
}
