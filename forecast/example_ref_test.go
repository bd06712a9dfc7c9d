package forecast_test

import (
	"fmt"

	"github.com/headroom-dev/headroom/forecast"
)

func ExampleFitHoltWinters() {
	// Five years of invented quarterly sales: a rise of 2 a quarter and a
	// season of +6, −2, −7, +3 around it.
	season := []float64{6, -2, -7, 3}
	var x []float64
	for i := range 20 {
		x = append(x, 100+2*float64(i)+season[i%4])
	}
	f, err := forecast.FitHoltWinters(x, 4, false)
	if err != nil {
		fmt.Println(err)
		return
	}
	for h := 1; h <= 4; h++ {
		fmt.Printf("quarter %d: %.1f\n", h, f.Forecast(h))
	}
	// Output:
	// quarter 1: 146.0
	// quarter 2: 140.0
	// quarter 3: 137.0
	// quarter 4: 149.0
}

func ExampleTheilSen() {
	// A line y = 1 + 2x with one wild value: the median of the pairwise
	// slopes ignores it, a least-squares line would not.
	x := []float64{0, 1, 2, 3, 4, 5, 6, 7, 8, 9}
	y := []float64{1, 3, 5, 7, 9, 11, 13, 100, 17, 19}
	slope, intercept := forecast.TheilSen(x, y)
	fmt.Printf("y = %.1f + %.1f·x\n", intercept, slope)
	lo, hi := forecast.TheilSenInterval(x, y, 0.95)
	fmt.Printf("95%% interval of the slope: [%.1f, %.1f]\n", lo, hi)
	// Output:
	// y = 1.0 + 2.0·x
	// 95% interval of the slope: [2.0, 2.0]
}
