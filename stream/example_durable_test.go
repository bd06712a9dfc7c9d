package stream_test

import (
	"context"
	"fmt"
	"os"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/rs/zerolog"

	"github.com/headroom-dev/headroom/state"
	"github.com/headroom-dev/headroom/stream"
)

// Durable ingest on an embedded server with JetStream: points sent to the
// points subject are kept in a stream, applied in order and snapshotted;
// a sidecar started again restores the snapshot and goes on after the
// sequence it covers (invented example data).
func ExampleDurable() {
	dir, _ := os.MkdirTemp("", "headroom-example-")
	defer os.RemoveAll(dir)
	ctx := context.Background()
	emb, _ := stream.StartEmbedded(ctx, stream.EmbeddedConfig{Port: -1, DataDir: dir + "/nats", Log: zerolog.Nop()})
	defer emb.Shutdown()
	nc, _ := nats.Connect(emb.URL())
	defer nc.Close()
	snaps := stream.DirSnapshots{Dir: dir + "/snapshots"}
	cfg := state.Config{Partitions: 1}

	run := func(send func()) {
		store, from := stream.LoadState(ctx, snaps, cfg, zerolog.Nop())
		if store == nil {
			store, _ = state.New(cfg)
		}
		fmt.Printf("start: %d series, after sequence %d\n", store.Len(), from.Seq)
		p, _ := stream.NewProcessor(store, printBreaches{}, stream.Config{})
		ready := make(chan struct{})
		d := &stream.Durable{Conn: nc, Processor: p, Snapshots: snaps, From: from, Ready: func() { close(ready) }}
		rctx, stop := context.WithCancel(ctx)
		done := make(chan error, 1)
		go func() { done <- d.Run(rctx) }()
		<-ready
		last := d.Applied()
		send()
		for d.Applied() < last+2 {
			time.Sleep(10 * time.Millisecond)
		}
		stop() // graceful: a final snapshot
		if err := <-done; err != nil {
			fmt.Println(err)
		}
	}
	send := func(hosts ...string) func() {
		return func() {
			for i, h := range hosts {
				ts := time.Date(2026, 12, 1, 0, i, 0, 0, time.UTC).UnixMilli()
				_ = nc.Publish("headroom.points.example", fmt.Appendf(nil, `{"metric":"disk_used_ratio","labels":{"host":%q},"ts":%d,"value":0.5}`, h, ts))
			}
		}
	}
	run(send("db-1", "db-2"))
	run(send("db-3", "db-1"))
	store, from := stream.LoadState(ctx, snaps, cfg, zerolog.Nop())
	fmt.Printf("end: %d series, after sequence %d\n", store.Len(), from.Seq)
	// Output:
	// start: 0 series, after sequence 0
	// start: 2 series, after sequence 2
	// end: 3 series, after sequence 4
}
