package forecast

import (
	"math"
	"math/rand/v2"
	"slices"
	"strconv"
	"testing"
)

// slopeRef is one entry of python/robust_slopes_co2_first100_outliers.json.
type slopeRef struct {
	Slope, Intercept float64
	LowSlope         float64 `json:"low_slope"`
	HighSlope        float64 `json:"high_slope"`
}

// Theil–Sen and Siegel on the first 100 co2 values with two outliers and
// without them, against SciPy 1.10.1 (python/robust_slopes_co2_first100_outliers.json):
// slopes and intercepts to absolute 1e-12, the 95 % interval exactly (the
// same rank rule, Sen 1968 eq. 2.6).
func TestRobustSlopesReference(t *testing.T) {
	var ref struct {
		Separate   slopeRef `json:"theilslopes_separate"`
		Joint      slopeRef `json:"theilslopes_joint"`
		Siegel     slopeRef `json:"siegelslopes_hierarchical"`
		NPairwise  int64    `json:"n_pairwise_slopes"`
		WithoutOut struct {
			Separate slopeRef `json:"theilslopes_separate"`
			Siegel   slopeRef `json:"siegelslopes_hierarchical"`
		} `json:"same_calls_on_column_co2_ppm_without_the_outliers"`
	}
	hwJSON(t, &ref, "python", "robust_slopes_co2_first100_outliers.json")
	cols := hwColumns(t, "datasets", "co2_first100_outliers.csv")
	x := cols["x"]
	cases := []struct {
		name           string
		y              []float64
		theilSen, sieg slopeRef
	}{
		{"with outliers", cols["y"], ref.Separate, ref.Siegel},                                // scipy theilslopes(method='separate'), siegelslopes(method='hierarchical')
		{"without outliers", cols["co2_ppm"], ref.WithoutOut.Separate, ref.WithoutOut.Siegel}, // the same calls on co2_ppm
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			const tol = 1e-12
			b, a := TheilSen(x, c.y)
			if math.Abs(b-c.theilSen.Slope) > tol || math.Abs(a-c.theilSen.Intercept) > tol { // scipy.stats.theilslopes, SciPy 1.10.1
				t.Errorf("Theil–Sen %.17g, %.17g; SciPy %.17g, %.17g", b, a, c.theilSen.Slope, c.theilSen.Intercept)
			}
			lo, hi := TheilSenInterval(x, c.y, 0.95)
			if lo != c.theilSen.LowSlope || hi != c.theilSen.HighSlope { // scipy.stats.theilslopes low_slope, high_slope, SciPy 1.10.1
				t.Errorf("interval [%.17g, %.17g], SciPy [%.17g, %.17g]", lo, hi, c.theilSen.LowSlope, c.theilSen.HighSlope)
			}
			b, a = Siegel(x, c.y)
			if math.Abs(b-c.sieg.Slope) > tol || math.Abs(a-c.sieg.Intercept) > tol { // scipy.stats.siegelslopes, SciPy 1.10.1
				t.Errorf("Siegel %.17g, %.17g; SciPy %.17g, %.17g", b, a, c.sieg.Slope, c.sieg.Intercept)
			}
		})
	}

	y := cols["y"]
	b, _ := TheilSen(x, y)
	// The joint intercept, median(y − slope·x), from the same slope.
	res := make([]float64, len(y))
	for i := range y {
		res[i] = y[i] - b*x[i]
	}
	if a := tsMedian(res); math.Abs(a-ref.Joint.Intercept) > 1e-12 { // scipy theilslopes(method='joint'), SciPy 1.10.1
		t.Errorf("joint intercept %.17g, SciPy %.17g", a, ref.Joint.Intercept)
	}
	// The interval bounds are the sorted pairwise slopes at the ranks the
	// README states (2145 and 2804 of 4950).
	var all []float64
	for i := range x {
		for j := i + 1; j < len(x); j++ {
			all = append(all, (y[j]-y[i])/(x[j]-x[i]))
		}
	}
	slices.Sort(all)
	if int64(len(all)) != ref.NPairwise { // n_pairwise_slopes in the same file
		t.Fatalf("%d pairwise slopes, SciPy %d", len(all), ref.NPairwise)
	}
	lo, hi := TheilSenInterval(x, y, 0.95)
	if lo != all[2145] || hi != all[2804] { // ranks from the reference README
		t.Errorf("interval [%v, %v], slopes at ranks 2145, 2804: [%v, %v]", lo, hi, all[2145], all[2804])
	}
}

// pairSlope (prepare.go) is not the Theil–Sen slope: it is the upper
// median of the n − ⌊n/2⌋ slopes between each point and the point ⌊n/2⌋
// later, O(n) instead of O(n²) pairs. It equals the Theil–Sen slope when
// all pairs agree (a line) or there is one pair, and is checked against its
// own definition on the co2 data with outliers.
func TestPairSlope(t *testing.T) {
	for _, c := range []struct {
		name string
		x, y []float64
	}{
		{"line", []float64{0, 1, 2, 3, 5, 8, 13}, []float64{1, 3, 5, 7, 11, 17, 27}},
		{"two points", []float64{2, 6}, []float64{1, -3}},
	} {
		b := pairSlope(c.x, slices.Clone(c.y), make([]float64, len(c.x)))
		ts, _ := TheilSen(c.x, c.y)
		if b != ts {
			t.Errorf("%s: pairSlope %v, Theil–Sen %v", c.name, b, ts)
		}
	}

	cols := hwColumns(t, "datasets", "co2_first100_outliers.csv")
	x, y := cols["x"], cols["y"]
	got := pairSlope(x, slices.Clone(y), make([]float64, len(x)))
	h := len(x) / 2
	var lag []float64
	for i := 0; i+h < len(x); i++ {
		lag = append(lag, (y[i+h]-y[i])/(x[i+h]-x[i]))
	}
	slices.Sort(lag)
	if want := lag[len(lag)/2]; got != want {
		t.Errorf("pairSlope %.17g, upper median of the lag-%d slopes %.17g", got, h, want)
	}
	ts, _ := TheilSen(x, y)
	// The reference's Theil–Sen slope is 0.05756 and its OLS slope 0.04456
	// (python/robust_slopes_co2_first100_outliers.json).
	t.Logf("co2 with outliers: pairSlope %.6f, Theil–Sen %.6f", got, ts)
}

// The pass-wise search used beyond the in-memory limit finds the same
// order statistics as selection over all slopes, also with many equal
// slopes (integer data on a grid).
func TestPairSlopesStream(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 5))
	n := 150
	x, y := make([]float64, n), make([]float64, n)
	xi, yi := make([]float64, n), make([]float64, n)
	for i := range x {
		x[i], y[i] = rng.Float64()*10, rng.NormFloat64()
		xi[i], yi[i] = float64(rng.IntN(6)), float64(rng.IntN(4))
	}
	for _, d := range []struct {
		name string
		x, y []float64
	}{{"continuous", x, y}, {"ties", xi, yi}} {
		ps, ok := newPairSlopes(d.x, d.y)
		if !ok {
			t.Fatal("newPairSlopes refused the data")
		}
		var all []float64
		ps.each(func(s float64) { all = append(all, s) })
		if int64(len(all)) != ps.count {
			t.Fatalf("%s: %d slopes, count %d", d.name, len(all), ps.count)
		}
		slices.Sort(all)
		ranks := []int64{0, 1, ps.count / 3, ps.count/2 - 1, ps.count / 2, ps.count - 2, ps.count - 1}
		for range 40 {
			ranks = append(ranks, rng.Int64N(ps.count))
		}
		for _, limit := range []int64{1, 40, 700} {
			ps.limit = limit
			got := ps.orderStats(ranks...)
			for i, k := range ranks {
				if got[i] != all[k] {
					t.Errorf("%s, limit %d: rank %d = %v, want %v", d.name, limit, k, got[i], all[k])
				}
			}
		}
	}
}

// Beyond the in-memory limit TheilSen finds the same median as sorting
// all slopes (invented data, 3000 points, 4.5 million slopes).
func TestTheilSenLarge(t *testing.T) {
	if testing.Short() {
		t.Skip("sorts 4.5 million slopes")
	}
	rng := rand.New(rand.NewPCG(8, 13))
	n := 3000
	x, y := make([]float64, n), make([]float64, n)
	for i := range x {
		x[i], y[i] = float64(i), 0.01*float64(i)+rng.NormFloat64()
	}
	all := make([]float64, 0, n*(n-1)/2)
	for i := range x {
		for j := i + 1; j < n; j++ {
			all = append(all, (y[j]-y[i])/(x[j]-x[i]))
		}
	}
	if len(all) <= maxStoredSlopes {
		t.Fatalf("%d slopes do not exceed the in-memory limit", len(all))
	}
	slices.Sort(all)
	want := (all[len(all)/2-1] + all[len(all)/2]) / 2
	if b, _ := TheilSen(x, y); b != want {
		t.Errorf("slope %.17g, median of the sorted slopes %.17g", b, want)
	}
}

func TestRobustSlopesDegenerate(t *testing.T) {
	nan, inf := math.NaN(), math.Inf(1)
	cases := []struct {
		name string
		x, y []float64
	}{
		{"empty", nil, nil},
		{"one point", []float64{1}, []float64{2}},
		{"lengths differ", []float64{1, 2, 3}, []float64{1, 2}},
		{"nan x", []float64{1, nan, 3}, []float64{1, 2, 3}},
		{"nan y", []float64{1, 2, 3}, []float64{1, 2, nan}},
		{"inf y", []float64{1, 2, 3}, []float64{inf, 2, 3}},
		{"range overflows", []float64{1, 2, 3}, []float64{-1e308, 0, 1e308}},
		{"all x equal", []float64{4, 4, 4}, []float64{1, 2, 3}},
	}
	for _, c := range cases {
		b, a := TheilSen(c.x, c.y)
		lo, hi := TheilSenInterval(c.x, c.y, 0.95)
		sb, sa := Siegel(c.x, c.y)
		for _, v := range []float64{b, a, lo, hi, sb, sa} {
			if !math.IsNaN(v) {
				t.Errorf("%s: Theil–Sen %v, %v [%v, %v], Siegel %v, %v; want NaN", c.name, b, a, lo, hi, sb, sa)
				break
			}
		}
	}
	x, y := []float64{0, 1, 2, 3}, []float64{0, 2, 4, 6}
	for _, conf := range []float64{0, 1, -0.5, 1.5, nan} {
		if lo, hi := TheilSenInterval(x, y, conf); !math.IsNaN(lo) || !math.IsNaN(hi) {
			t.Errorf("conf %v: [%v, %v], want NaN", conf, lo, hi)
		}
	}
	// Ties in x leave those pairs out; a vertical pair does not count.
	if b, a := TheilSen([]float64{1, 1, 2, 3}, []float64{0, 5, 2, 4}); b != 2 || a != 3-2*1.5 {
		// Slopes 2, 2, −3, −0.5, 2: median 2; median y 3, median x 1.5.
		t.Errorf("ties in x: %v, %v; want 2, 0", b, a)
	}
	if b, _ := Siegel([]float64{1, 2, 3, 4}, []float64{1, 2, 3, 40}); b != 1 {
		// Repeated medians: each point's median slope, the outlier's own row aside, is 1.
		t.Errorf("Siegel with one outlier: slope %v, want 1", b)
	}
}

func BenchmarkTheilSen(b *testing.B) {
	rng := rand.New(rand.NewPCG(1, 2))
	for _, n := range []int{168, 200} {
		x, y := make([]float64, n), make([]float64, n)
		for i := range x {
			x[i], y[i] = float64(i), 0.1*float64(i)+rng.NormFloat64()
		}
		b.Run("n"+strconv.Itoa(n), func(b *testing.B) {
			b.ReportAllocs()
			for b.Loop() {
				TheilSen(x, y)
			}
		})
		b.Run("interval/n"+strconv.Itoa(n), func(b *testing.B) {
			b.ReportAllocs()
			for b.Loop() {
				TheilSenInterval(x, y, 0.95)
			}
		})
		b.Run("siegel/n"+strconv.Itoa(n), func(b *testing.B) {
			b.ReportAllocs()
			for b.Loop() {
				Siegel(x, y)
			}
		})
	}
}
