package forecast

// Scratch holds the buffers an engine works in, so that a Fit in steady
// state allocates nothing. A Scratch belongs to one goroutine at a time;
// keep one per worker and pass it to every Fit.
type Scratch struct {
	x   []float64 // hours relative to the origin
	y   []float64 // standardized, detrended value
	yc  []float64 // y clipped against its neighbours, for the changepoint scan
	om  []float64 // inverse variance of each point (standardized units)
	som []float64 // its square root
	grp []uint8   // resolution group of each point
	buf []float64 // selection work space
	suf []moments // suffix sums for the changepoint scan

	// Per resolution group: bucket width in hours, standardized variance,
	// raw points and buckets.
	width    [maxGroups]float64
	vg       [maxGroups]float64
	pts, cnt [maxGroups]float64
	ng       int

	// The standardization y = (value − ref)/scale − trend·x, the
	// standardized variance of one bucket of the newest resolution, and the
	// variance inflation of its noise from serial correlation.
	ref, scale, trend, vnew, kappa float64

	// Cycle detection and the seasonal engine (cycle.go, tide.go).
	cyc  cycleScratch
	tide Tide // what Choose returns, so that it need not allocate
}

// NewScratch returns an empty Scratch; its buffers grow to the largest view
// seen and are then reused.
func NewScratch() *Scratch { return &Scratch{} }

// reset sizes every buffer for n points, reusing capacity.
func (sc *Scratch) reset(n int) {
	sc.x = grow(sc.x, n)
	sc.y = grow(sc.y, n)
	sc.yc = grow(sc.yc, n)
	sc.om = grow(sc.om, n)
	sc.som = grow(sc.som, n)
	sc.buf = grow(sc.buf, n)
	if cap(sc.grp) < n {
		sc.grp = make([]uint8, n)
	}
	sc.grp = sc.grp[:n]
	if cap(sc.suf) < n+1 {
		sc.suf = make([]moments, n+1)
	}
	sc.suf = sc.suf[:n+1]
}

func grow(s []float64, n int) []float64 {
	if cap(s) < n {
		return make([]float64, n)
	}
	return s[:n]
}
