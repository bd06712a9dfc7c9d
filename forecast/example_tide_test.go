package forecast_test

import (
	"fmt"
	"math"
	"time"

	"github.com/headroom-dev/headroom/forecast"
	"github.com/headroom-dev/headroom/state"
)

func ExampleTide() {
	// Two weeks of hourly buckets of a series with a daily cycle between
	// 40 and 60, peaking at 14:00 UTC: the uniform hourly level is what
	// cycle detection reads, the composite what the trend is fitted to.
	end := time.Date(2025, 3, 15, 0, 0, 0, 0, time.UTC).UnixMilli()
	const hours = 336
	v := &state.View{End: end}
	hourly := state.LevelView{Width: time.Hour.Milliseconds(), Start: end - hours*time.Hour.Milliseconds()}
	for i := range hours {
		hourOfDay := float64(i % 24)
		y := 50 + 10*math.Cos(2*math.Pi*(hourOfDay+0.5-14)/24)
		hourly.Y = append(hourly.Y, y)
		v.T = append(v.T, float64(i-hours)*3600+1800)
		v.Y, v.W, v.N = append(v.Y, y), append(v.W, 1), append(v.N, 60)
	}
	v.Levels = []state.LevelView{hourly}

	sc := forecast.NewScratch()
	var cycles forecast.Cycles
	e := forecast.Choose(v, sc, &cycles, "")
	fmt.Println(e.Name(), cycles.Period)

	var f forecast.Forecast
	if !e.Fit(v, sc, &f) {
		fmt.Println("no fit")
		return
	}
	for _, h := range []int{2, 8, 14, 20} {
		fmt.Printf("%02d:00 %.0f\n", h, f.Mean(float64(h)*3600))
	}
	// Output:
	// tide 24h0m0s
	// 02:00 40
	// 08:00 50
	// 14:00 60
	// 20:00 50
}
