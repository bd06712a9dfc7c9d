package forecast_test

import (
	"fmt"
	"strings"
	"time"

	"github.com/headroom-dev/headroom/forecast"
	"github.com/headroom-dev/headroom/state"
)

func ExampleParseMatch() {
	m, err := forecast.ParseMatch(`disk_used_ratio,mount=/data*,host!="test,1"`)
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println(m.Match("disk_used_ratio", map[string]string{"mount": "/data2", "host": "db-1"}))
	fmt.Println(m.Match("disk_used_ratio", map[string]string{"mount": "/data2", "host": "test,1"}))
	fmt.Println(m.Match("disk_used_ratio", map[string]string{"mount": "/"}))
	fmt.Println(m)
	// Output:
	// true
	// false
	// false
	// disk_used_ratio,mount=/data*,host!="test,1"
}

func ExampleProject() {
	// A disk at 70 % filling by 10 points a day, with a little uncertainty.
	f := forecast.Forecast{
		Origin: time.Date(2025, 3, 1, 0, 0, 0, 0, time.UTC).UnixMilli(),
		Level:  0.70, Slope: 0.10 / 86400,
		Sigma: 0.01, VarLevel: 1e-5, VarSlope: 1e-16,
		ScaleLower: 1, ScaleUpper: 1,
	}
	r := forecast.Rule{Threshold: 0.9, Direction: forecast.Above, Horizon: 72 * time.Hour}
	p := forecast.Project(&f, &r)
	ms := func(t int64) string { return time.UnixMilli(t).UTC().Format("Jan 2 15:04") }
	fmt.Printf("probability %.2f\n", p.Probability)
	fmt.Println("eta  ", ms(p.ETA))
	fmt.Println("early", ms(p.Early))
	fmt.Println("late ", ms(p.Late))
	// Output:
	// probability 1.00
	// eta   Mar 3 00:00
	// early Mar 2 20:44
	// late  Mar 3 03:16
}

func ExampleIncline_Fit() {
	// Hourly buckets of a series rising by 0.5 an hour, then one spike.
	v := &state.View{End: time.Date(2025, 3, 1, 0, 0, 0, 0, time.UTC).UnixMilli()}
	for i := range 48 {
		t := float64(i-48)*3600 + 1800 // bucket centre, seconds before End
		y := 20 + 0.5*t/3600 + 0.1*float64(i%3-1)
		if i == 47 {
			y += 40
		}
		v.T, v.Y, v.W, v.N = append(v.T, t), append(v.Y, y), append(v.W, 1), append(v.N, 60)
	}
	var f forecast.Forecast
	if !(forecast.Incline{}).Fit(v, forecast.NewScratch(), &f) {
		return
	}
	fmt.Printf("level %.1f, %.2f per hour\n", f.Level, f.Slope*3600)
	lo, hi := f.Band(0, 0.95)
	fmt.Printf("now within [%.0f, %.0f]: the spike widens the band\n", lo, hi)
	// Output:
	// level 20.0, 0.50 per hour
	// now within [-12, 52]: the spike widens the band
}

func ExampleParseRules() {
	rules, err := forecast.ParseRules(strings.NewReader(`{"rules":[
		{"name":"disk-full","match":"disk_used_ratio,mount=/data*","threshold":0.9,"direction":"above","horizon":"24h"}
	]}`))
	if err != nil {
		fmt.Println(err)
		return
	}
	r := rules[0]
	fmt.Println(r.Name, r.Match, r.Direction, r.Threshold, r.Horizon, r.OpenAt, r.CloseAt, r.Confirm)

	_, err = forecast.ParseRules(strings.NewReader(`{"rules":[{"name":"x","threshold":1,"direction":"sideways"}]}`))
	fmt.Println(err)
	// Output:
	// disk-full disk_used_ratio,mount=/data* above 0.9 24h0m0s 0.8 0.5 10m0s
	// forecast: rule "x": direction: "sideways": want above or below
}

func ExampleAdvance() {
	r := forecast.Rule{Threshold: 0.9, Direction: forecast.Above}
	r.Defaults()
	var inc state.Incident
	id := func() [16]byte { return [16]byte{1} }
	start := time.Date(2025, 3, 1, 0, 0, 0, 0, time.UTC).UnixMilli()
	for _, s := range []struct {
		minute int64
		prob   float64
	}{{0, 0.85}, {5, 0.9}, {10, 0.92}, {30, 0.3}, {35, 0.2}, {40, 0.1}} {
		if ev, ok := forecast.Advance(&inc, &r, forecast.Projection{Probability: s.prob}, start+s.minute*60_000, id); ok {
			fmt.Println(s.minute, ev)
		}
	}
	// Output:
	// 10 opened
	// 40 resolved
}
