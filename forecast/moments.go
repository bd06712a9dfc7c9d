package forecast

// moments are the weighted sums a straight-line least-squares fit needs.
// Callers keep x and y small (x in hours from the origin, y standardized and
// detrended) so that the centred moments below lose few digits.
type moments struct{ w, x, y, xx, xy, yy float64 }

func (m *moments) add(x, y, w float64) {
	wx, wy := w*x, w*y
	m.w += w
	m.x += wx
	m.y += wy
	m.xx += wx * x
	m.xy += wx * y
	m.yy += wy * y
}

// centred returns the weighted means and the centred second moments.
func (m *moments) centred() (xm, ym, sxx, sxy, syy float64) {
	if m.w <= 0 {
		return 0, 0, 0, 0, 0
	}
	xm, ym = m.x/m.w, m.y/m.w
	sxx = m.xx - xm*m.x
	sxy = m.xy - xm*m.y
	syy = m.yy - ym*m.y
	return xm, ym, max(sxx, 0), sxy, max(syy, 0)
}

// degenerate reports whether the spread of x is too small to carry a slope,
// relative to the size of x itself.
func degenerate(sxx, xx float64) bool { return sxx <= 1e-12*xx || sxx <= 0 }

// rss is the weighted residual sum of squares of the least-squares line; a
// level alone when x has no spread. The changepoint scan calls it twice per
// candidate split, hence the single reciprocal.
func (m *moments) rss() float64 {
	if m.w <= 0 {
		return 0
	}
	inv := 1 / m.w
	sxx := m.xx - m.x*m.x*inv
	sxy := m.xy - m.x*m.y*inv
	syy := m.yy - m.y*m.y*inv
	if degenerate(sxx, m.xx) {
		return max(syy, 0)
	}
	return max(syy-sxy*sxy/sxx, 0)
}

// line returns the least-squares line as its value ym at the weighted mean
// xm of x and its slope b, with sxx for the slope's variance; b is 0 when x
// has no spread.
func (m *moments) line() (xm, ym, b, sxx float64) {
	xm, ym, sxx, sxy, _ := m.centred()
	if degenerate(sxx, m.xx) {
		return xm, ym, 0, 0
	}
	return xm, ym, sxy / sxx, sxx
}
