package forecast

import (
	"math"
	"testing"
	"time"
)

func testForecast() Forecast {
	return Forecast{
		Origin: 1_000_000, Level: 10, Slope: 0.001,
		Sigma: 0.5, VarLevel: 0.04, CovLevelSlope: -1e-6, VarSlope: 1e-9, Transition: 0.25,
		ScaleLower: 1, ScaleUpper: 1,
	}
}

func TestVar(t *testing.T) {
	f := testForecast()
	tests := []struct{ dt, want float64 }{
		{0, 0.25 + 0.04 + 0.25},
		{1000, 0.25 + 0.04 - 2e-3 + 1e-3 + 0.25},
		{86400, 0.25 + 0.04 + 2*86400*-1e-6 + 86400*86400*1e-9 + 0.25},
	}
	for _, tc := range tests {
		if got := f.Var(tc.dt); math.Abs(got-tc.want) > 1e-12 {
			t.Errorf("Var(%v) = %v, want %v", tc.dt, got, tc.want)
		}
	}
	// Never below the observation noise, whatever rounding does.
	g := Forecast{Sigma: 1, VarLevel: 1, CovLevelSlope: -2, VarSlope: 1}
	if got := g.Var(1); got < 1 {
		t.Errorf("Var = %v below Sigma²", got)
	}
}

func TestQuantileBand(t *testing.T) {
	f := testForecast()
	dt := 3600.0
	sd := math.Sqrt(f.Var(dt))
	m := f.Mean(dt)
	z975 := 1.959963984540054 // common practice: z(0.975)
	if got := f.Quantile(dt, 0.975); math.Abs(got-(m+z975*sd)) > 1e-12 {
		t.Errorf("Quantile(0.975) = %v, want %v", got, m+z975*sd)
	}
	if got := f.Quantile(dt, 0.5); got != m {
		t.Errorf("median %v, want the mean %v", got, m)
	}
	lo, hi := f.Band(dt, 0.95)
	if math.Abs((hi-m)-(m-lo)) > 1e-12 || math.Abs(hi-(m+z975*sd)) > 1e-12 {
		t.Errorf("Band(0.95) = %v, %v around %v", lo, hi, m)
	}
	// Asymmetric scales act on their own side only.
	f.ScaleLower, f.ScaleUpper = 0.5, 2
	lo2, hi2 := f.Band(dt, 0.95)
	if math.Abs((m-lo2)-0.5*(m-lo)) > 1e-12 || math.Abs((hi2-m)-2*(hi-m)) > 1e-12 {
		t.Errorf("scaled band %v, %v; unscaled %v, %v", lo2, hi2, lo, hi)
	}
	// Zero scales count as 1 (a Forecast built by hand).
	g := testForecast()
	g.ScaleLower, g.ScaleUpper = 0, 0
	if lo3, hi3 := g.Band(dt, 0.95); lo3 != lo || hi3 != hi {
		t.Errorf("zero scales: %v, %v, want %v, %v", lo3, hi3, lo, hi)
	}
}

func TestPoints(t *testing.T) {
	f := testForecast()
	pts := f.Points(24*time.Hour, 12, nil)
	if len(pts) != 12 {
		t.Fatalf("%d points", len(pts))
	}
	for i, p := range pts {
		wantT := f.Origin + int64(i+1)*2*3600*1000
		if p.T != wantT {
			t.Errorf("point %d at %d, want %d", i, p.T, wantT)
		}
		dt := float64(p.T-f.Origin) / 1000
		if math.Abs(p.Mean-f.Mean(dt)) > 1e-12 {
			t.Errorf("point %d mean %v", i, p.Mean)
		}
		lo, hi := f.Band(dt, 0.8)
		lo95, hi95 := f.Band(dt, 0.95)
		if math.Abs(p.Lower80-lo) > 1e-9 || math.Abs(p.Upper80-hi) > 1e-9 || math.Abs(p.Lower95-lo95) > 1e-9 || math.Abs(p.Upper95-hi95) > 1e-9 {
			t.Errorf("point %d bands %+v, want %v %v %v %v", i, p, lo, hi, lo95, hi95)
		}
		if !(p.Lower95 < p.Lower80 && p.Lower80 < p.Mean && p.Mean < p.Upper80 && p.Upper80 < p.Upper95) {
			t.Errorf("point %d bands out of order: %+v", i, p)
		}
	}
	// Uneven division still ends at the horizon; appends to dst.
	pts = f.Points(time.Hour+time.Millisecond, 7, pts[:1])
	if len(pts) != 8 || pts[7].T != f.Origin+3600001 {
		t.Errorf("uneven: %d points, last at %d", len(pts), pts[len(pts)-1].T)
	}
	if got := f.Points(time.Hour, 0, nil); len(got) != 0 {
		t.Errorf("zero steps gave %d points", len(got))
	}
	if got := f.Points(-time.Hour, 3, nil); len(got) != 0 {
		t.Errorf("negative horizon gave %d points", len(got))
	}
}
