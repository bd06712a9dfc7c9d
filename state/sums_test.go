package state

import (
	"bufio"
	"bytes"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"gonum.org/v1/gonum/stat"
)

func relErr(got, want float64) float64 {
	if want == 0 {
		return math.Abs(got)
	}
	return math.Abs(got-want) / math.Abs(want)
}

// twoPass fits by the textbook two-pass formulas (centre on the weighted
// means, then sum the residuals), the common-practice way to get the
// standard errors that gonum does not return.
func twoPass(x, y, w []float64) (a, b, rss, seA, seB float64) {
	var sw, sx, sy float64
	for i := range x {
		sw += w[i]
		sx += w[i] * x[i]
		sy += w[i] * y[i]
	}
	xm, ym := sx/sw, sy/sw
	var sxx, sxy float64
	for i := range x {
		sxx += w[i] * (x[i] - xm) * (x[i] - xm)
		sxy += w[i] * (x[i] - xm) * (y[i] - ym)
	}
	b = sxy / sxx
	a = ym - b*xm
	for i := range x {
		r := y[i] - a - b*x[i]
		rss += w[i] * r * r
	}
	s2 := rss / float64(len(x)-2)
	return a, b, rss, math.Sqrt(s2 * (1/sw + xm*xm/sxx)), math.Sqrt(s2 / sxx)
}

// Fit agrees with gonum's weighted least squares on seeded random data.
func TestFitGonum(t *testing.T) {
	cases := []struct {
		name     string
		n        int
		weighted bool
		x0       float64 // where x starts; far from 0 exercises the origin
		seed     uint64
	}{
		{"unweighted", 50, false, -100, 1},
		{"weighted", 200, true, -100, 2},
		{"small", 3, false, 0, 3},
		{"weighted, x near a unix time", 500, true, 1.7e9, 4},
		{"unweighted, x near a unix time", 500, false, 1.7e9, 5},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			rng := rand.New(rand.NewPCG(c.seed, 99))
			x, y, w := make([]float64, c.n), make([]float64, c.n), make([]float64, c.n)
			for i := range x {
				x[i] = c.x0 + float64(i)*10 + rng.Float64()*5
				y[i] = 3 - 0.02*(x[i]-c.x0) + rng.NormFloat64()
				w[i] = 1
				if c.weighted {
					w[i] = 0.1 + rng.Float64()*10
				}
			}
			s := Sums{X0: c.x0}
			for i := range x {
				s.Add(x[i], y[i], w[i])
			}
			l, ok := s.Fit()
			if !ok {
				t.Fatal("Fit failed")
			}
			var gw []float64
			if c.weighted {
				gw = w
			}
			alpha, beta := stat.LinearRegression(x, y, gw, false) // gonum stat.LinearRegression
			r2 := stat.RSquared(x, y, gw, alpha, beta)            // gonum stat.RSquared
			// The intercept at x = 0 is far outside the data when x is
			// near a unix time; compare it on the scale of the fitted
			// values it is computed from.
			scale := max(math.Abs(alpha), math.Abs(beta*x[0]))
			if e := math.Abs(l.Intercept-alpha) / scale; e > 1e-10 {
				t.Errorf("intercept %v, gonum %v: relative error %g", l.Intercept, alpha, e)
			}
			if e := relErr(l.Slope, beta); e > 1e-10 {
				t.Errorf("slope %v, gonum %v: relative error %g", l.Slope, beta, e)
			}
			if e := relErr(l.R2, r2); e > 1e-10 {
				t.Errorf("R² %v, gonum %v: relative error %g", l.R2, r2, e)
			}
			if c.n <= 2 {
				return
			}
			_, _, rss, seA, seB := twoPass(x, y, w) // textbook two-pass formulas
			if e := relErr(l.RSS, rss); e > 1e-9 {
				t.Errorf("RSS %v, two-pass %v: relative error %g", l.RSS, rss, e)
			}
			if e := relErr(l.SESlope, seB); e > 1e-9 {
				t.Errorf("SE slope %v, two-pass %v: relative error %g", l.SESlope, seB, e)
			}
			if e := relErr(l.SEIntercept, seA); e > 1e-9 {
				t.Errorf("SE intercept %v, two-pass %v: relative error %g", l.SEIntercept, seA, e)
			}
			if l.N != float64(c.n) {
				t.Errorf("N %v, want %d", l.N, c.n)
			}
		})
	}
}

func TestFitDegenerate(t *testing.T) {
	cases := []struct {
		name string
		s    func() Sums
		ok   bool
	}{
		{"empty", func() Sums { return Sums{} }, false},
		{"one point", func() Sums { var s Sums; s.Add(1, 2, 1); return s }, false},
		{"same x twice", func() Sums { var s Sums; s.Add(1e6, 2, 1); s.Add(1e6, 3, 1); return s }, false},
		{"same x, many", func() Sums {
			var s Sums
			for i := range 100 {
				s.Add(0.1, float64(i), 1)
			}
			return s
		}, false},
		{"zero weights only", func() Sums { var s Sums; s.Add(1, 2, 0); s.Add(2, 3, math.NaN()); return s }, false},
		{"two points", func() Sums { var s Sums; s.Add(1, 2, 1); s.Add(2, 3, 1); return s }, true},
		{"hand-made unit sums", func() Sums { return Sums{W: 3, X: 3, Y: 6, XX: 5, XY: 8, YY: 14} }, true},
	}
	for _, c := range cases {
		l, ok := c.s().Fit()
		if ok != c.ok {
			t.Errorf("%s: ok %v, want %v", c.name, ok, c.ok)
		}
		if ok && (math.IsNaN(l.Slope) || math.IsNaN(l.Intercept) || math.IsNaN(l.ResidualSD)) {
			t.Errorf("%s: NaN in %+v", c.name, l)
		}
	}
	// Two points: an exact line, unknown noise.
	var s Sums
	s.Add(1, 2, 1)
	s.Add(2, 3, 1)
	if l, _ := s.Fit(); l.Slope != 1 || l.Intercept != 1 || !math.IsInf(l.ResidualSD, 1) || !math.IsInf(l.SESlope, 1) {
		t.Errorf("two points: %+v", l)
	}
	// Points (0,1), (1,2), (2,3): y = 1 + x, N from W.
	if l, _ := (Sums{W: 3, X: 3, Y: 6, XX: 5, XY: 8, YY: 14}).Fit(); l.Slope != 1 || l.Intercept != 1 || l.N != 3 || l.RSS != 0 || l.R2 != 1 {
		t.Errorf("hand-made sums: %+v", l)
	}
	// Constant y: slope 0, R² 1 by convention.
	s = Sums{}
	for i := range 5 {
		s.Add(float64(i), 4, 1)
	}
	if l, _ := s.Fit(); l.Slope != 0 || l.Intercept != 4 || l.R2 != 1 || l.ResidualSD != 0 {
		t.Errorf("constant y: %+v", l)
	}
}

// moduleRoot walks up from the package directory to the directory holding
// go.mod.
func moduleRoot(t *testing.T) string {
	dir, err := os.Getwd()
	if err != nil {
		t.Fatal(err)
	}
	for {
		if _, err := os.Stat(filepath.Join(dir, "go.mod")); err == nil {
			return dir
		}
		parent := filepath.Dir(dir)
		if parent == dir {
			t.Fatal("go.mod not found above the package")
		}
		dir = parent
	}
}

// readShared reads a file of the shared reference folder beside the module,
// skipping the test when it is absent.
func readShared(t *testing.T, rel string) []byte {
	path := filepath.Join(moduleRoot(t), "..", "shared", "reference", rel)
	b, err := os.ReadFile(path)
	if os.IsNotExist(err) {
		t.Skipf("reference data %s not found; skipping", rel)
	}
	if err != nil {
		t.Fatal(err)
	}
	return b
}

// strdLines returns lines from..to (1-based, inclusive) of an StRD file,
// CRLF or LF.
func strdLines(b []byte, from, to int) []string {
	var out []string
	sc := bufio.NewScanner(bytes.NewReader(b))
	for n := 1; sc.Scan(); n++ {
		if n >= from && n <= to {
			out = append(out, strings.TrimRight(sc.Text(), "\r"))
		}
	}
	return out
}

// strdBlock finds "<name> (lines A to B)" in the header.
func strdBlock(t *testing.T, b []byte, name string) (int, int) {
	for _, line := range strdLines(b, 1, 30) {
		i := strings.Index(line, name)
		if i < 0 || !strings.Contains(line, "(lines") {
			continue
		}
		f := strings.Fields(strings.NewReplacer("(", " ", ")", " ").Replace(line[i+len(name):]))
		// f: lines A to B
		if len(f) >= 4 && f[0] == "lines" && f[2] == "to" {
			a, err1 := strconv.Atoi(f[1])
			z, err2 := strconv.Atoi(f[3])
			if err1 == nil && err2 == nil {
				return a, z
			}
		}
	}
	t.Fatalf("header names no %q block", name)
	return 0, 0
}

// NIST StRD Norris: a straight line fitted from running sums must match the
// certified values to the digits the reference README states for fits from
// sums.
func TestFitNorris(t *testing.T) {
	b := readShared(t, "nist-strd/Norris.dat")
	from, to := strdBlock(t, b, "Data")
	var x, y []float64
	for _, line := range strdLines(b, from, to) {
		f := strings.Fields(line)
		if len(f) != 2 {
			t.Fatalf("data line %q", line)
		}
		yi, err1 := strconv.ParseFloat(f[0], 64)
		xi, err2 := strconv.ParseFloat(f[1], 64)
		if err1 != nil || err2 != nil {
			t.Fatalf("data line %q", line)
		}
		x, y = append(x, xi), append(y, yi)
	}
	if len(x) != 36 {
		t.Fatalf("%d observations, want 36", len(x))
	}
	// Certified values, from the same file.
	cert := map[string]float64{}
	from, to = strdBlock(t, b, "Certified Values")
	for _, line := range strdLines(b, from, to) {
		f := strings.Fields(line)
		num := func(s string) float64 {
			v, err := strconv.ParseFloat(s, 64)
			if err != nil {
				t.Fatalf("certified line %q: %v", line, err)
			}
			return v
		}
		switch {
		case len(f) == 3 && (f[0] == "B0" || f[0] == "B1"):
			cert[f[0]], cert["sd"+f[0]] = num(f[1]), num(f[2])
		case len(f) == 3 && f[0] == "Standard" && f[1] == "Deviation":
			cert["resSD"] = num(f[2])
		case len(f) == 2 && f[0] == "R-Squared":
			cert["R2"] = num(f[1])
		}
	}
	if len(cert) != 6 {
		t.Fatalf("parsed certified values %v, want 6", cert)
	}

	var direct Sums
	for i := range x {
		direct.Add(x[i], y[i], 1)
	}
	var p Prefix
	p.Build(x, y, nil)
	for name, s := range map[string]Sums{"Sums.Add": direct, "Prefix.Range": p.Range(0, p.Len())} {
		l, ok := s.Fit()
		if !ok {
			t.Fatalf("%s: Fit failed", name)
		}
		checks := []struct {
			what      string
			got, want float64
			tol       float64
		}{
			{"B0", l.Intercept, cert["B0"], 1e-11},             // NIST StRD Norris, certified values
			{"B1", l.Slope, cert["B1"], 1e-12},                 // NIST StRD Norris, certified values
			{"R²", l.R2, cert["R2"], 1e-12},                    // NIST StRD Norris, certified values
			{"residual SD", l.ResidualSD, cert["resSD"], 1e-9}, // NIST StRD Norris, certified values
			{"SD of B0", l.SEIntercept, cert["sdB0"], 1e-9},    // NIST StRD Norris, certified values
			{"SD of B1", l.SESlope, cert["sdB1"], 1e-9},        // NIST StRD Norris, certified values
		}
		for _, c := range checks {
			t.Logf("%s %s rel err %.3g", name, c.what, relErr(c.got, c.want))
			if e := relErr(c.got, c.want); e > c.tol {
				t.Errorf("%s: %s = %.15g, certified %.15g: relative error %.2g > %g", name, c.what, c.got, c.want, e, c.tol)
			}
		}
	}
	// The CSV of certified values agrees with the file, where present.
	if csv := readOptional(t, "nist-strd/certified_values.csv"); csv != nil {
		for _, line := range strings.Split(strings.ReplaceAll(string(csv), "\r", ""), "\n") {
			f := strings.Split(line, ",")
			if len(f) < 3 || f[0] != "Norris" {
				continue
			}
			key := map[string]string{"B0": "B0", "B1": "B1", "residual_sd": "resSD", "r_squared": "R2"}[f[1]]
			v, err := strconv.ParseFloat(f[2], 64)
			if key == "" || err != nil || v != cert[key] {
				t.Errorf("certified_values.csv %q disagrees with Norris.dat", line)
			}
		}
	}
}

func readOptional(t *testing.T, rel string) []byte {
	b, err := os.ReadFile(filepath.Join(moduleRoot(t), "..", "shared", "reference", rel))
	if err != nil {
		return nil
	}
	return b
}

// Prefix.Range equals the sums taken directly over the range, to the
// precision that differences of running sums allow.
func TestPrefixRange(t *testing.T) {
	rng := rand.New(rand.NewPCG(11, 12))
	const n = 400
	x, y, w := make([]float64, n), make([]float64, n), make([]float64, n)
	for i := range x {
		x[i] = -1.2e6 + float64(i)*3000 + rng.Float64()*100
		y[i] = 1e3 + rng.NormFloat64()*50
		w[i] = 1 / float64(1+i%3)
	}
	var p Prefix
	for _, weights := range [][]float64{w, nil} {
		p.Build(x, y, weights)
		if p.Len() != n {
			t.Fatalf("Len %d", p.Len())
		}
		full := p.Range(0, n)
		for range 300 {
			i := rng.IntN(n)
			j := i + rng.IntN(n-i+1)
			got := p.Range(i, j)
			want := Sums{X0: x[0]}
			for k := i; k < j; k++ {
				wk := 1.0
				if weights != nil {
					wk = weights[k]
				}
				want.Add(x[k], y[k], wk)
			}
			pairs := [][3]float64{
				{got.W, want.W, full.W}, {got.X, want.X, math.Abs(full.X) + full.W*1.2e6}, {got.Y, want.Y, full.Y},
				{got.XX, want.XX, full.XX}, {got.XY, want.XY, full.W * 1.2e6 * 1.2e3}, {got.YY, want.YY, full.YY},
				{got.N, want.N, full.N},
			}
			for f, pr := range pairs {
				if math.Abs(pr[0]-pr[1]) > 1e-13*pr[2] {
					t.Fatalf("Range(%d, %d) field %d: %v, direct %v", i, j, f, pr[0], pr[1])
				}
			}
			if got.X0 != x[0] {
				t.Fatalf("origin %v, want %v", got.X0, x[0])
			}
			if j-i >= 20 {
				lg, _ := got.Fit()
				lw, _ := want.Fit()
				if relErr(lg.Slope, lw.Slope) > 1e-8 || math.Abs(lg.Intercept-lw.Intercept) > 1e-8*(math.Abs(lw.Intercept)+math.Abs(lw.Slope*x[i])) {
					t.Fatalf("Range(%d, %d) fits %v + %v x, direct %v + %v x", i, j, lg.Intercept, lg.Slope, lw.Intercept, lw.Slope)
				}
			}
		}
	}
	// Bounds are clipped; empty ranges are zero.
	if p.Range(-5, 1e6) != p.Range(0, n) || p.Range(7, 7).W != 0 || p.Range(9, 3).N != 0 {
		t.Error("clipping")
	}
	// Unequal lengths are cut to the shortest; Build reuses memory.
	p.Build(x[:10], y[:8], nil)
	if p.Len() != 8 {
		t.Errorf("Len %d after unequal lengths, want 8", p.Len())
	}
	p.Build(nil, nil, nil)
	if p.Len() != 0 || p.Range(0, 1).W != 0 {
		t.Error("empty prefix")
	}
	if a := testing.AllocsPerRun(10, func() { p.Build(x, y, w) }); a != 0 {
		t.Errorf("Build allocates %v times when capacity suffices", a)
	}
}

// Sub moves sums with another origin before subtracting.
func TestSumsSubOrigin(t *testing.T) {
	a, b := Sums{X0: 100}, Sums{X0: -3}
	for i := range 10 {
		x, y := float64(i*7), float64(i*i)
		a.Add(x, y, 2)
		if i < 4 {
			b.Add(x, y, 2)
		}
	}
	want := Sums{X0: 100}
	for i := 4; i < 10; i++ {
		want.Add(float64(i*7), float64(i*i), 2)
	}
	got := a.Sub(b)
	for f, pr := range [][2]float64{{got.W, want.W}, {got.X, want.X}, {got.XX, want.XX}, {got.XY, want.XY}, {got.Y, want.Y}, {got.YY, want.YY}, {got.N, want.N}} {
		if math.Abs(pr[0]-pr[1]) > 1e-9*math.Max(1, math.Abs(pr[1])) {
			t.Errorf("field %d: %v, want %v", f, pr[0], pr[1])
		}
	}
}
