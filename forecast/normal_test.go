package forecast

import (
	"math"
	"testing"

	"gonum.org/v1/gonum/stat/distuv"
)

func TestNormQuantileReference(t *testing.T) {
	tests := []struct {
		p, want float64
		src     string
	}{
		{0.975, 1.959963984540054, "common practice: z(0.975), 16 digits as widely tabulated"},
		{0.9, 1.2815515655446004, "common practice: z(0.9), 17 digits as widely tabulated"},
		{0.5, 0, "symmetry"},
		{0.95, 1.6448536269514722, "from memory: z(0.95)"},
		{0.995, 2.5758293035489004, "from memory: z(0.995)"},
		{0.025, -1.959963984540054, "symmetry of z(0.975)"},
		{0.1, -1.2815515655446004, "symmetry of z(0.9)"},
	}
	for _, tc := range tests {
		got := normQuantile(tc.p)
		if math.Abs(got-tc.want) > 1e-14*max(1, math.Abs(tc.want)) {
			t.Errorf("normQuantile(%v) = %.17g, want %.17g (%s)", tc.p, got, tc.want, tc.src)
		}
	}
}

func TestNormCDFReference(t *testing.T) {
	tests := []struct {
		x, want float64
		src     string
	}{
		{0, 0.5, "symmetry"},
		{1.959963984540054, 0.975, "common practice: z(0.975)"},
		{1, 0.8413447460685429, "from memory: Φ(1)"},
		{-3, 0.0013498980316300946, "from memory: Φ(-3)"},
	}
	for _, tc := range tests {
		got := normCDF(tc.x)
		if math.Abs(got-tc.want) > 1e-15*max(1e-300, math.Abs(tc.want))*10 {
			t.Errorf("normCDF(%v) = %.17g, want %.17g (%s)", tc.x, got, tc.want, tc.src)
		}
	}
}

// gonum's distuv.Normal is an independent implementation of both functions.
func TestNormAgainstGonum(t *testing.T) {
	n := distuv.UnitNormal
	ps := []float64{1e-300, 1e-100, 1e-20, 1e-10, 1e-5, 0.001, 0.01, 0.02425, 0.024, 0.025, 0.1, 0.2, 0.3, 0.4, 0.49, 0.5, 0.51, 0.6, 0.75, 0.9, 0.975, 0.99, 0.999, 0.9999999}
	for _, p := range ps {
		got, want := normQuantile(p), n.Quantile(p) // gonum distuv.Normal.Quantile
		if math.Abs(got-want) > 1e-13*max(1, math.Abs(want)) {
			t.Errorf("normQuantile(%g) = %.17g, gonum %.17g", p, got, want)
		}
	}
	for x := -30.0; x <= 8; x += 0.37 {
		got, want := normCDF(x), n.CDF(x) // gonum distuv.Normal.CDF
		if math.Abs(got-want) > 1e-14*want {
			t.Errorf("normCDF(%g) = %.17g, gonum %.17g", x, got, want)
		}
	}
}

func TestNormQuantileEdges(t *testing.T) {
	if !math.IsInf(normQuantile(0), -1) || !math.IsInf(normQuantile(1), 1) {
		t.Error("quantile at 0 or 1 not infinite")
	}
	for _, p := range []float64{-0.1, 1.1, math.NaN()} {
		if !math.IsNaN(normQuantile(p)) {
			t.Errorf("normQuantile(%v) not NaN", p)
		}
	}
	// Round trip through the CDF across the range.
	for p := 0.0005; p < 1; p += 0.0005 {
		if got := normCDF(normQuantile(p)); math.Abs(got-p) > 1e-15 {
			t.Fatalf("CDF(quantile(%v)) = %v", p, got)
		}
	}
}
