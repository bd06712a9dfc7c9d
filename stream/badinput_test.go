package stream_test

import (
	"encoding/json"
	"fmt"
	"math"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/rs/zerolog"
	"github.com/vmihailenco/msgpack/v5"

	"github.com/headroom-dev/headroom/state"
	"github.com/headroom-dev/headroom/stream"
)

// TestBadInputOnTheBus sends every kind of bad input through a real
// embedded nats-server, each message carrying good points beside the bad
// ones (invented data): every refusal arrives on the rejected subject with
// its reason and a capped copy of the payload, is counted, and costs the
// good points nothing.
func TestBadInputOnTheBus(t *testing.T) {
	now := time.Date(2026, 12, 1, 12, 0, 0, 0, time.UTC)
	pl := startPipeline(t, state.Config{Partitions: 2, MaxSeries: 3}, stream.Config{
		Limits: stream.Limits{MaxMessage: 4096, MaxPoints: 20},
		Now:    func() time.Time { return now },
	}, func(nc *nats.Conn) stream.Emitter {
		return stream.NewPublisher(nc, stream.Subjects{}, stream.JSON, zerolog.Nop())
	})
	emb, store, proc := pl.emb, pl.store, pl.proc

	var mu sync.Mutex
	var rejects []stream.RejectRecord
	watch, err := nats.Connect(emb.URL())
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(watch.Close)
	if _, err := watch.Subscribe(stream.Subjects{}.Rejected(), func(m *nats.Msg) {
		var r stream.RejectRecord
		if err := json.Unmarshal(m.Data, &r); err != nil {
			t.Errorf("reject record: %v", err)
			return
		}
		mu.Lock()
		rejects = append(rejects, r)
		mu.Unlock()
	}); err != nil {
		t.Fatal(err)
	}
	if err := watch.Flush(); err != nil {
		t.Fatal(err)
	}

	ms := func(d time.Duration) int64 { return now.Add(d).UnixMilli() }
	good := func(d time.Duration) string {
		return fmt.Sprintf(`{"metric":"good","ts":%d,"value":1}`, ms(d))
	}
	manyLabels := make([]string, 40)
	for i := range manyLabels {
		manyLabels[i] = fmt.Sprintf(`"l%d":"v"`, i)
	}
	type point struct {
		Metric string  `msgpack:"metric"`
		TS     int64   `msgpack:"ts"`
		Value  float64 `msgpack:"value"`
	}
	nonFinite, err := msgpack.Marshal([]point{{"good", ms(-50 * time.Minute), 1}, {"good", ms(-50 * time.Minute), math.NaN()}, {"good", ms(-50 * time.Minute), math.Inf(1)}})
	if err != nil {
		t.Fatal(err)
	}
	tooMany := make([]string, 25)
	for i := range tooMany {
		tooMany[i] = good(time.Duration(-40*60+i) * time.Second)
	}
	messages := []struct {
		reason string
		msg    []byte
	}{
		{stream.ReasonMalformed, []byte(`[` + good(-59*time.Minute) + `,{"metric":`)},
		{stream.ReasonOversize, []byte(`[` + good(-58*time.Minute) + `,"` + strings.Repeat("x", 5000) + `"]`)},
		{stream.ReasonBadMetric, []byte(`[` + good(-57*time.Minute) + `,{"metric":123,"ts":1,"value":1}]`)},
		{stream.ReasonBadLabel, []byte(`[` + good(-56*time.Minute) + `,{"metric":"m","labels":{"a":7},"ts":1,"value":1}]`)},
		{stream.ReasonTooManyLabels, []byte(`[` + good(-55*time.Minute) + `,{"metric":"m","labels":{` + strings.Join(manyLabels, ",") + `},"ts":1,"value":1}]`)},
		{stream.ReasonBadValue, []byte(`[` + good(-54*time.Minute) + `,{"metric":"m","ts":1,"value":"high"}]`)},
		{stream.ReasonBadTimestamp, []byte(`[` + good(-53*time.Minute) + `,{"metric":"m","ts":"yesterday","value":1}]`)},
		{stream.ReasonTSOutOfRange, []byte(`[` + good(-52*time.Minute) + fmt.Sprintf(`,{"metric":"m","ts":%d,"value":1}]`, ms(1000*time.Hour)))},
		{stream.ReasonNonFinite, nonFinite},
		{stream.ReasonTooManyPoints, []byte(`[` + strings.Join(tooMany, ",") + `]`)},
		// Older than the open buckets of its series, once newer points have
		// closed them.
		{"late", []byte(`[` + good(-20*time.Minute) + `,` + good(-45*time.Minute) + `]`)},
		// Two more series fill the limit of three; the fourth is refused.
		{"series_limit", []byte(fmt.Sprintf(`[{"metric":"a","ts":%d,"value":1},{"metric":"b","ts":%[1]d,"value":1},{"metric":"c","ts":%[1]d,"value":1},`, ms(-19*time.Minute)) + good(-18*time.Minute) + `]`)},
		// A duplicate is no error: it counts as a second point.
		{"", []byte(`[` + good(-17*time.Minute) + `,` + good(-17*time.Minute) + `]`)},
	}
	p, err := nats.Connect(emb.URL())
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(p.Close)
	for _, m := range messages {
		if err := p.Publish(stream.Subjects{}.PointsBase()+".test", m.msg); err != nil {
			t.Fatal(err)
		}
	}
	if err := p.Flush(); err != nil {
		t.Fatal(err)
	}
	deadline := time.Now().Add(10 * time.Second)
	for proc.Stats().Messages < uint64(len(messages)) && time.Now().Before(deadline) {
		time.Sleep(10 * time.Millisecond)
	}
	// The last reject records may still be in flight.
	for time.Now().Before(deadline) {
		mu.Lock()
		n := uint64(len(rejects))
		mu.Unlock()
		if st := proc.Stats(); st.Messages == uint64(len(messages)) && n == st.Rejected && n > 0 {
			break
		}
		time.Sleep(10 * time.Millisecond)
	}

	mu.Lock()
	defer mu.Unlock()
	seen := map[string]stream.RejectRecord{}
	for _, r := range rejects {
		seen[r.Reason] = r
		if r.Payload == "" || len(r.Payload) > 1400 || r.Size == 0 || r.Detail == "" {
			t.Errorf("%s: payload %d bytes (message %d), detail %q", r.Reason, len(r.Payload), r.Size, r.Detail)
		}
	}
	for _, m := range messages {
		if m.reason == "" {
			continue
		}
		if _, ok := seen[m.reason]; !ok {
			t.Errorf("no reject record with reason %q; got %v", m.reason, keys(seen))
		}
	}
	st := proc.Stats()
	if st.Rejected != uint64(len(rejects)) {
		t.Errorf("stats count %d refusals, %d reject records arrived", st.Rejected, len(rejects))
	}
	// The good point of each message but the oversize one (refused
	// whole): the malformed message's, read before its syntax broke; one
	// each beside the six bad points and the non-finite values; the twenty
	// the too-many message keeps; the late message's newer point; the one
	// beside the series over the limit; and both duplicates.
	var got uint64
	store.Do(state.MakeKey(nil, []byte("good"), nil), func(s *state.Series) { got = s.Points() })
	if want := uint64(1 + 6 + 1 + 20 + 1 + 1 + 2); got != want {
		t.Errorf("good series holds %d points, want %d", got, want)
	}
}

func keys(m map[string]stream.RejectRecord) []string {
	var k []string
	for s := range m {
		k = append(k, s)
	}
	return k
}
