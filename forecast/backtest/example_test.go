package backtest_test

import (
	"context"
	"fmt"
	"math"
	"time"

	"github.com/headroom-dev/headroom/forecast/backtest"
)

// Score a forecast against the baselines on one invented series: a volume
// filling by 1 % a day with a small wobble, one point every 5 minutes for
// three days, scored after one day of warm-up.
func Example() {
	start := time.Date(2026, 3, 1, 0, 0, 0, 0, time.UTC).UnixMilli()
	s := &backtest.Series{Name: "volume", Step: 5 * time.Minute}
	for i := range 3 * 288 {
		s.T = append(s.T, start+int64(i)*300_000)
		s.V = append(s.V, 0.5+0.01*float64(i)/288+0.001*math.Sin(float64(i)))
	}
	res, err := backtest.Evaluate(context.Background(), []*backtest.Series{s}, backtest.Options{})
	if err != nil {
		fmt.Println(err)
		return
	}
	rep := backtest.NewReport("example", res, backtest.BySeries)
	o := rep.Overall
	fmt.Println("origins:", o.Origins)
	fmt.Println("methods:", backtest.NumMethods)
	// Output:
	// origins: 47
	// methods: 7
}
