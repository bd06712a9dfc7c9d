package stream_test

import (
	"fmt"
	"time"

	"github.com/headroom-dev/headroom/state"
	"github.com/headroom-dev/headroom/stream"
)

func ExampleDecoder_Decode() {
	now := func() time.Time { return time.Date(2024, 6, 1, 0, 0, 0, 0, time.UTC) }
	d := stream.NewDecoder(stream.Limits{}, now)
	msg := []byte(`[
		{"metric": "disk_used_bytes", "labels": {"mount": "/data", "host": "db-1"}, "ts": 1717199990000, "value": 8.5e11},
		{"metric": "disk_used_bytes", "labels": {"host": "db-1"}, "ts": "2024-05-31T23:59:50Z", "value": "full"}
	]`)
	n := d.Decode(msg,
		func(p *stream.Point) {
			// The point is only valid during the call: copy what you keep.
			fmt.Printf("%s at %d = %g\n", p.Key.Text, p.TS, p.Value)
		},
		func(r stream.Reject) {
			fmt.Printf("point %d rejected: %s (%s)\n", r.Index, r.Reason, r.Detail)
		})
	fmt.Println(n, "delivered")
	// Output:
	// disk_used_bytes{host="db-1",mount="/data"} at 1717199990000 = 8.5e+11
	// point 1 rejected: bad_value (value is not a number)
	// 1 delivered
}

func ExampleToken() {
	k := state.MakeKey(nil, []byte("http.requests"), []state.Label{
		{Name: []byte("route"), Value: []byte("/api/*")},
	})
	fmt.Println(stream.Token(k))
	// Output:
	// http_requests__api__-3e77d4a01e4422fd
}
