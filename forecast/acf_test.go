package forecast

import (
	"encoding/csv"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"testing"
)

// readColumns reads the named columns of a CSV file with a header row as
// numbers, skipping the test when the file cannot be read.
func readColumns(t *testing.T, path string, names ...string) [][]float64 {
	t.Helper()
	fh, err := os.Open(path)
	if err != nil {
		t.Skipf("%s: %v", filepath.Base(path), err)
	}
	defer fh.Close()
	recs, err := csv.NewReader(fh).ReadAll()
	if err != nil || len(recs) < 2 {
		t.Fatalf("%s: %d records, %v", path, len(recs), err)
	}
	idx := make([]int, len(names))
	for i, name := range names {
		idx[i] = -1
		for j, h := range recs[0] {
			if h == name {
				idx[i] = j
			}
		}
		if idx[i] < 0 {
			t.Fatalf("%s: no column %q in %v", path, name, recs[0])
		}
	}
	out := make([][]float64, len(names))
	for _, rec := range recs[1:] {
		for i, j := range idx {
			v, err := strconv.ParseFloat(rec[j], 64)
			if err != nil {
				t.Fatalf("%s: %v", path, err)
			}
			out[i] = append(out[i], v)
		}
	}
	return out
}

// datasetColumns names the value column of each reference series.
var datasetColumns = map[string][2]string{
	"co2":           {"co2.csv", "co2_ppm"},
	"AirPassengers": {"airpassengers.csv", "passengers_thousands"},
	"taylor":        {"taylor.csv", "demand_mw"},
	"co2_outliers":  {"co2_first100_outliers.csv", "y"},
}

func readDataset(t *testing.T, name string) []float64 {
	t.Helper()
	dc := datasetColumns[name]
	return readColumns(t, filepath.Join(sharedDir(t), "datasets", dc[0]), dc[1])[0]
}

func TestACFReference(t *testing.T) {
	ref := sharedDir(t)
	tests := []struct {
		series string
		diff   bool
		file   string // lag,acf
	}{
		{"co2", false, "r/acf_co2_lag36.csv"},                                             // R stats::acf, R 4.2.2
		{"co2", true, "r/acf_co2_diff1_lag36.csv"},                                        // R stats::acf of diff(co2), R 4.2.2
		{"AirPassengers", false, "r/acf_AirPassengers_lag36.csv"},                         // R stats::acf, R 4.2.2
		{"taylor", false, "r/acf_taylor_lag672.csv"},                                      // R stats::acf, R 4.2.2
		{"co2_outliers", false, "r/acf_co2_first100_outliers_lag24.csv"},                  // R stats::acf of column y, R 4.2.2
		{"co2", false, "python/acf_statsmodels_co2_lag36.csv"},                            // statsmodels 0.13.5 acf(fft=False, adjusted=False)
		{"co2_outliers", false, "python/acf_statsmodels_co2_first100_outliers_lag24.csv"}, // statsmodels 0.13.5, same call
	}
	for _, tc := range tests {
		t.Run(tc.file, func(t *testing.T) {
			x := readDataset(t, tc.series)
			if tc.diff {
				for i := range len(x) - 1 {
					x[i] = x[i+1] - x[i]
				}
				x = x[:len(x)-1]
			}
			cols := readColumns(t, filepath.Join(ref, tc.file), "lag", "acf")
			lags, want := cols[0], cols[1]
			got := ACF(x, int(lags[len(lags)-1]), nil)
			if len(got) != len(want) {
				t.Fatalf("%d lags, want %d", len(got), len(want))
			}
			worst := 0.0
			for k := range want {
				if int(lags[k]) != k {
					t.Fatalf("row %d is lag %v", k, lags[k])
				}
				worst = max(worst, math.Abs(got[k]-want[k]))
			}
			if worst > 1e-12 {
				t.Errorf("largest difference %.3g, want ≤ 1e-12", worst)
			}
			t.Logf("largest difference %.3g over %d lags", worst, len(want))
		})
	}
}

// Bartlett bands as statsmodels computes them beside acf(alpha=0.05).
func TestBartlettReference(t *testing.T) {
	ref := sharedDir(t)
	for _, tc := range []struct{ series, file string }{
		{"co2", "python/acf_statsmodels_co2_lag36.csv"},                            // statsmodels 0.13.5 acf(alpha=0.05), Bartlett bands
		{"co2_outliers", "python/acf_statsmodels_co2_first100_outliers_lag24.csv"}, // statsmodels 0.13.5 acf(alpha=0.05), Bartlett bands
	} {
		t.Run(tc.file, func(t *testing.T) {
			x := readDataset(t, tc.series)
			cols := readColumns(t, filepath.Join(ref, tc.file), "acf", "ci95_lower", "ci95_upper")
			r := ACF(x, len(cols[0])-1, nil)
			se := bartlett(r, len(x), nil)
			z := normQuantile(0.975)
			worst := 0.0
			for k := range r {
				worst = max(worst, math.Abs(r[k]-z*se[k]-cols[1][k]), math.Abs(r[k]+z*se[k]-cols[2][k]))
			}
			if worst > 1e-12 {
				t.Errorf("largest band difference %.3g, want ≤ 1e-12", worst)
			}
		})
	}
}

func TestACFConventions(t *testing.T) {
	nan := math.NaN()
	tests := []struct {
		name   string
		x      []float64
		maxLag int
		want   []float64
	}{
		// r_1 = Σ(x_t−x̄)(x_{t+1}−x̄)/Σ(x_t−x̄)², worked by hand: x̄ = 2.5,
		// deviations −1.5 −0.5 0.5 1.5, Σd² = 5.
		{"hand", []float64{1, 2, 3, 4}, 3, []float64{1, (0.75 - 0.25 + 0.75) / 5, (-0.75 - 0.75) / 5, -2.25 / 5}},
		{"lags stop at n-1", []float64{1, 2, 3, 4}, 10, []float64{1, 0.25, -0.3, -0.45}},
		// A gap: mean 8/3 and Σd² over 1, 3, 4; products with the gap
		// left out (hand computation).
		{"gap", []float64{1, nan, 3, 4}, 2, []float64{1, (1.0 / 3 * 4.0 / 3) / (25.0/9 + 1.0/9 + 16.0/9), (-5.0 / 3 * 1.0 / 3) / (42.0 / 9)}},
		{"constant", []float64{2, 2, 2}, 1, []float64{nan, nan}},
		{"all gaps", []float64{nan, nan}, 1, []float64{nan, nan}},
		{"empty", nil, 3, []float64{}},
		{"negative lag", []float64{1, 2}, -1, []float64{}},
	}
	for _, tc := range tests {
		got := ACF(tc.x, tc.maxLag, nil)
		if len(got) != len(tc.want) {
			t.Errorf("%s: %v, want %v", tc.name, got, tc.want)
			continue
		}
		for k := range got {
			w := tc.want[k]
			if math.IsNaN(w) != math.IsNaN(got[k]) || math.Abs(got[k]-w) > 1e-15 {
				t.Errorf("%s: lag %d = %v, want %v", tc.name, k, got[k], w)
			}
		}
	}
	// dst is reused.
	dst := make([]float64, 0, 8)
	if got := ACF([]float64{1, 3, 2, 5}, 2, dst); &got[0] != &dst[:1][0] {
		t.Error("ACF did not reuse dst")
	}
}

// lagSums on centred data equals ACF.
func TestLagSums(t *testing.T) {
	x := []float64{3, 1, 4, 1, 5, 9, 2, 6, 5, 3, 5, 8, 9, 7}
	want := ACF(x, 9, nil)
	m := 0.0
	for _, v := range x {
		m += v
	}
	m /= float64(len(x))
	d := make([]float64, len(x))
	den := 0.0
	for i, v := range x {
		d[i] = v - m
		den += d[i] * d[i]
	}
	got := make([]float64, 10)
	lagSums(d, den, got)
	for k := range got {
		if math.Abs(got[k]-want[k]) > 1e-14 {
			t.Errorf("lag %d: %v, want %v", k, got[k], want[k])
		}
	}
}
