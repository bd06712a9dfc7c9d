package forecast

import (
	"bufio"
	"encoding/csv"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
)

// sharedDir finds the shared reference folder beside the module root (the
// folder holding go.mod), or skips the test when it is absent. Tests only
// read from it.
func sharedDir(t *testing.T) string {
	t.Helper()
	dir, err := os.Getwd()
	if err != nil {
		t.Skipf("shared reference data: %v", err)
	}
	for {
		if _, err := os.Stat(filepath.Join(dir, "go.mod")); err == nil {
			break
		}
		up := filepath.Dir(dir)
		if up == dir {
			t.Skip("shared reference data: module root not found")
		}
		dir = up
	}
	shared := filepath.Join(dir, "..", "shared", "reference")
	if _, err := os.Stat(shared); err != nil {
		t.Skipf("shared reference data absent (%s); skipping", shared)
	}
	return shared
}

// The straight-line helper behind the changepoint scan, on NIST StRD Norris
// against its certified values, to the tolerances the reference README
// states for fits from running sums.
func TestMomentsNorris(t *testing.T) {
	path := filepath.Join(sharedDir(t), "nist-strd", "Norris.dat")
	fh, err := os.Open(path)
	if err != nil {
		t.Skipf("Norris.dat: %v", err)
	}
	defer fh.Close()
	// The header states "Data (lines 61 to 96)"; read that block.
	var xs, ys []float64
	sc := bufio.NewScanner(fh)
	for line := 1; sc.Scan(); line++ {
		if line < 61 || line > 96 {
			continue
		}
		f := strings.Fields(strings.TrimRight(sc.Text(), "\r"))
		if len(f) != 2 {
			t.Fatalf("line %d: %q", line, sc.Text())
		}
		y, err1 := strconv.ParseFloat(f[0], 64)
		x, err2 := strconv.ParseFloat(f[1], 64)
		if err1 != nil || err2 != nil {
			t.Fatalf("line %d: %q", line, sc.Text())
		}
		xs, ys = append(xs, x), append(ys, y)
	}
	if len(xs) != 36 {
		t.Fatalf("%d observations, want 36", len(xs))
	}
	var m moments
	for i := range xs {
		m.add(xs[i], ys[i], 1)
	}
	xm, ym, b, sxx := m.line()
	b0 := ym - b*xm
	rss := m.rss()
	_, _, _, _, syy := m.centred()
	sd := math.Sqrt(rss / 34)
	checks := []struct {
		name      string
		got, want float64
		rel       float64
	}{
		{"B1", b, 1.00211681802045, 1e-12},                            // NIST StRD Norris, certified values
		{"B0", b0, -0.262323073774029, 1e-11},                         // NIST StRD Norris, certified values
		{"R²", 1 - rss/syy, 0.999993745883712, 1e-12},                 // NIST StRD Norris, certified values
		{"residual SD", sd, 0.884796396144373, 1e-9},                  // NIST StRD Norris, certified values
		{"SD of B1", sd / math.Sqrt(sxx), 0.429796848199937e-3, 1e-9}, // NIST StRD Norris, certified values
	}
	for _, c := range checks {
		if math.Abs(c.got-c.want) > c.rel*math.Abs(c.want) {
			t.Errorf("Norris %s = %.15g, certified %.15g", c.name, c.got, c.want)
		}
	}
}

// The robust fit on the first 100 monthly CO2 values with two gross
// outliers. Huber's estimator is not the one the reference computed, so the
// checks are loose: it must land near the line of the clean data and far
// from ordinary least squares on the contaminated data.
func TestHuberCO2Outliers(t *testing.T) {
	path := filepath.Join(sharedDir(t), "datasets", "co2_first100_outliers.csv")
	fh, err := os.Open(path)
	if err != nil {
		t.Skipf("co2_first100_outliers.csv: %v", err)
	}
	defer fh.Close()
	recs, err := csv.NewReader(fh).ReadAll()
	if err != nil || len(recs) != 101 {
		t.Fatalf("%d records, %v", len(recs), err)
	}
	const (
		olsClean = 0.05806036603660365 // scipy.stats.linregress on co2_ppm (python/robust_slopes_co2_first100_outliers.json)
		olsDirty = 0.04455901590159015 // scipy.stats.linregress on y, with the outliers (same file)
		theilSen = 0.05756355932203598 // scipy.stats.theilslopes on y (same file)
	)
	sc := NewScratch()
	sc.reset(100)
	fit := func(col int) float64 {
		for i, r := range recs[1:] {
			x, err1 := strconv.ParseFloat(r[1], 64)
			y, err2 := strconv.ParseFloat(r[col], 64)
			if err1 != nil || err2 != nil {
				t.Fatalf("record %v", r)
			}
			sc.x[i], sc.y[i], sc.om[i], sc.som[i], sc.grp[i] = x, y, 1, 1, 0
		}
		return sc.huber(0, 100, 1.345, 0).b
	}
	dirty, clean := fit(3), fit(2)
	t.Logf("Huber slope %.5f with outliers, %.5f without; OLS %.5f / %.5f, Theil–Sen %.5f", dirty, clean, olsDirty, olsClean, theilSen)
	if math.Abs(dirty-olsClean) > 0.003 || math.Abs(dirty-olsClean) > math.Abs(olsDirty-olsClean)/4 {
		t.Errorf("Huber slope with outliers %.5f, clean OLS %.5f", dirty, olsClean)
	}
	if math.Abs(clean-olsClean) > 0.001 {
		t.Errorf("Huber slope on clean data %.5f, OLS %.5f", clean, olsClean)
	}
}
