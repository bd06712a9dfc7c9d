package state_test

import (
	"bytes"
	"errors"
	"fmt"
	"math"
	"time"

	"github.com/headroom-dev/headroom/state"
)

func ExampleStore() {
	store, err := state.New(state.Config{})
	if err != nil {
		panic(err)
	}
	labels := []state.Label{{Name: []byte("mount"), Value: []byte("/var")}, {Name: []byte("host"), Value: []byte("db1")}}
	key := state.MakeKey(nil, []byte("disk_used_bytes"), labels)

	// The first point opens its bucket and the one before (lateness is one
	// bucket), so the first close, at 12:01, closes an empty bucket.
	// Ten minutes of one point every 30 s, growing by 1 MB a minute.
	start := time.Date(2024, 3, 1, 12, 0, 0, 0, time.UTC).UnixMilli()
	closes := 0
	for i := range 21 {
		ts := start + int64(i)*30_000
		v := 500e9 + float64(i)*0.5e6
		if err := store.Add(key, ts, v, func(*state.Series) { closes++ }); err != nil {
			fmt.Println(err)
		}
	}

	var view state.View
	store.Do(key, func(s *state.Series) { s.View(&view, 0) })
	fmt.Println(view.Key)
	fmt.Println("onClose calls:", closes, "- view ends", time.UnixMilli(view.End).UTC().Format("15:04"))
	for i := range view.Len() {
		fmt.Printf("t=%4.0fs mean=%.0f n=%d\n", view.T[i], view.Y[i], view.N[i])
	}
	// Output:
	// disk_used_bytes{host="db1",mount="/var"}
	// onClose calls: 10 - view ends 12:09
	// t=-510s mean=500000250000 n=2
	// t=-450s mean=500001250000 n=2
	// t=-390s mean=500002250000 n=2
	// t=-330s mean=500003250000 n=2
	// t=-270s mean=500004250000 n=2
	// t=-210s mean=500005250000 n=2
	// t=-150s mean=500006250000 n=2
	// t= -90s mean=500007250000 n=2
	// t= -30s mean=500008250000 n=2
}

func ExampleStore_AddBatch() {
	store, err := state.New(state.Config{})
	if err != nil {
		panic(err)
	}
	cpu := func(host string) state.Key {
		return state.MakeKey(nil, []byte("cpu_busy_ratio"), []state.Label{{Name: []byte("host"), Value: []byte(host)}})
	}
	start := time.Date(2024, 3, 1, 12, 0, 0, 0, time.UTC).UnixMilli()
	batch := []state.Entry{
		{Key: cpu("a"), TS: start, Value: 0.25},
		{Key: cpu("b"), TS: start, Value: 0.5},
		{Key: cpu("a"), TS: start + 30_000, Value: 0.75},
		{Key: cpu("a"), TS: start + 150_000, Value: 0.5}, // closes 12:00 for a
		{Key: cpu("b"), TS: start - 120_000, Value: 0.5}, // before b's open buckets
		{Key: cpu("c"), TS: start, Value: math.Inf(1)},   // refused, c is not created
	}
	closes := 0
	applied := store.AddBatch(batch, func(*state.Series) { closes++ })
	fmt.Println("applied", applied, "of", len(batch), "- onClose calls:", closes, "- series:", store.Len())
	for _, e := range batch {
		if e.Err != nil {
			fmt.Println("refused:", errors.Is(e.Err, state.ErrLate), errors.Is(e.Err, state.ErrValue))
		}
	}
	var view state.View
	store.Do(cpu("a"), func(s *state.Series) { s.View(&view, 0) })
	fmt.Println(view.Key, view.Y, view.N)
	// Output:
	// applied 4 of 6 - onClose calls: 1 - series: 2
	// refused: true false
	// refused: false true
	// cpu_busy_ratio{host="a"} [0.5] [2]
}

func ExampleSums_Fit() {
	// A noisy line, x far from zero.
	xs := []float64{1000, 1001, 1002, 1003, 1004}
	ys := []float64{502.1, 502.4, 503.1, 503.4, 504.0}
	s := state.Sums{X0: 1000} // sums about x = 1000 keep the digits
	for i := range xs {
		s.Add(xs[i], ys[i], 1)
	}
	line, ok := s.Fit()
	fmt.Println(ok)
	fmt.Printf("y = %.2f + %.2f x, residual SD %.3f, R² %.3f\n", line.Intercept, line.Slope, line.ResidualSD, line.R2)

	// The same through prefix sums: any range in O(1).
	var p state.Prefix
	p.Build(xs, ys, nil)
	tail, _ := p.Range(2, 5).Fit()
	fmt.Printf("last three: slope %.2f\n", tail.Slope)
	// Output:
	// true
	// y = 22.04 + 0.48 x, residual SD 0.110, R² 0.985
	// last three: slope 0.45
}

func ExampleStore_WriteSnapshot() {
	cfg := state.Config{Partitions: 4}
	store, err := state.New(cfg)
	if err != nil {
		panic(err)
	}
	key := state.MakeKey(nil, []byte("queue_depth"), []state.Label{{Name: []byte("queue"), Value: []byte("orders")}})
	start := time.Date(2024, 3, 1, 12, 0, 0, 0, time.UTC).UnixMilli()
	for i := range 10 {
		if err := store.Add(key, start+int64(i)*30_000, float64(100+i), nil); err != nil {
			panic(err)
		}
	}

	// The meta says what the state covers, here the last stream sequence
	// applied; a restart restores the snapshot and resumes after it.
	var snap bytes.Buffer
	if err := store.WriteSnapshot(&snap, []byte("seq=4711")); err != nil {
		panic(err)
	}
	restored, meta, err := state.Restore(state.Config{Partitions: 16}, &snap)
	if err != nil {
		panic(err)
	}
	var before, after state.View
	store.Do(key, func(s *state.Series) { s.View(&before, 0) })
	restored.Do(key, func(s *state.Series) { s.View(&after, 0) })
	fmt.Println(string(meta), restored.Len(), after.Y, after.N)
	fmt.Println("same:", fmt.Sprint(before) == fmt.Sprint(after))

	// A snapshot is refused into a store with another layout.
	var again bytes.Buffer
	if err := store.WriteSnapshot(&again, nil); err != nil {
		panic(err)
	}
	_, _, err = state.Restore(state.Config{Lateness: 2 * time.Minute}, &again)
	fmt.Println(errors.Is(err, state.ErrSnapshotLayout))
	// Output:
	// seq=4711 1 [100.5 102.5 104.5] [2 2 2]
	// same: true
	// true
}
