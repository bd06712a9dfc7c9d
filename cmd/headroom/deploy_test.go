package main

import (
	"context"
	"encoding/json"
	"fmt"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/nats-io/nats-server/v2/server"
	"github.com/nats-io/nats.go"
	"github.com/rs/zerolog"

	"github.com/headroom-dev/headroom/stream"
)

// TestDeployServerConfig runs durable serve against a server configured by
// deploy/nats-server.conf, as the sidecar user, and checks that its
// permissions let it do everything durable mode needs (streams, consumer,
// acknowledgements, snapshots in the object store, records), that a
// producer can send points and a consumer read breach events.
func TestDeployServerConfig(t *testing.T) {
	if testing.Short() {
		t.Skip("starts a server from the deployment config")
	}
	for _, v := range [][2]string{{"HEADROOM_NATS_PASSWORD", "sidecar-pw"}, {"HEADROOM_PRODUCER_PASSWORD", "producer-pw"}, {"HEADROOM_CONSUMER_PASSWORD", "consumer-pw"}} {
		t.Setenv(v[0], v[1])
	}
	conf, err := server.ProcessConfigFile(filepath.Join("..", "..", "deploy", "nats-server.conf"))
	if err != nil {
		t.Fatal(err)
	}
	store := t.TempDir()
	emb, err := stream.StartEmbedded(context.Background(), stream.EmbeddedConfig{Port: -1, Log: zerolog.Nop(), ExtraOpts: func(o *server.Options) {
		o.Users, o.JetStream, o.JetStreamMaxStore, o.MaxPayload = conf.Users, true, conf.JetStreamMaxStore, conf.MaxPayload
		o.StoreDir = store // the file's /var/lib path is for a real host
	}})
	if err != nil {
		t.Fatal(err)
	}
	defer emb.Shutdown()
	url := emb.URL()

	ctx, cancel := context.WithCancel(context.Background())
	var log syncBuffer
	done := make(chan int, 1)
	args := []string{"serve", "--nats", url, "--user", "headroom", "--password", "sidecar-pw", "--durable", "--snapshot-every", "200ms",
		"--threshold", "0.9", "--match", "volume_used_ratio", "--horizon", "12h", "--warmup", "0", "--every", "5m"}
	go func() { done <- run(ctx, args, &log, &log) }()
	if !waitUntil(20*time.Second, func() bool { return strings.Contains(log.String(), `"ingesting durably"`) }) {
		cancel()
		t.Fatalf("serve did not start: %s", log.String())
	}

	consumer, err := nats.Connect(url, nats.UserInfo("consumer", "consumer-pw"))
	if err != nil {
		t.Fatal(err)
	}
	defer consumer.Close()
	events := make(chan *nats.Msg, 64)
	if _, err := consumer.ChanSubscribe("headroom.breach.*", events); err != nil {
		t.Fatal(err)
	}
	if err := consumer.Flush(); err != nil {
		t.Fatal(err)
	}
	producer, err := nats.Connect(url, nats.UserInfo("producer", "producer-pw"))
	if err != nil {
		t.Fatal(err)
	}
	defer producer.Close()
	start := time.Now().UTC().Add(-30 * time.Hour).Truncate(time.Hour)
	for m := 0; m < 20*60; m += 10 {
		var b strings.Builder
		b.WriteByte('[')
		for i := range 10 {
			if i > 0 {
				b.WriteByte(',')
			}
			fmt.Fprintf(&b, `{"metric":"volume_used_ratio","labels":{"host":"db-1"},"ts":%d,"value":%g}`,
				start.Add(time.Duration(m+i)*time.Minute).UnixMilli(), 0.5+0.03*float64(m+i)/60)
		}
		b.WriteByte(']')
		if err := producer.Publish("headroom.points.fleet", []byte(b.String())); err != nil {
			t.Fatal(err)
		}
	}
	if err := producer.Flush(); err != nil {
		t.Fatal(err)
	}
	select {
	case m := <-events:
		var r stream.BreachRecord
		if err := json.Unmarshal(m.Data, &r); err != nil || r.State != "opened" {
			t.Errorf("breach record %s: %v", m.Data, err)
		}
	case <-time.After(20 * time.Second):
		t.Errorf("no breach event reached the consumer: %s", log.String())
	}
	// The sidecar's own user can see its consumer; stop once all is applied.
	js := connectJS(t, url, nats.UserInfo("headroom", "sidecar-pw"))
	applied := func() uint64 { return ackFloor(js) }
	if !waitUntil(20*time.Second, func() bool { return applied() == 120 }) {
		t.Errorf("applied %d of 120 messages", applied())
	}
	cancel()
	if code := <-done; code != 0 {
		t.Fatalf("serve exit %d: %s", code, log.String())
	}
	for _, bad := range []string{"Permissions Violation", "permissions violation", `"level":"error"`} {
		if strings.Contains(log.String(), bad) {
			t.Errorf("log has %q: %s", bad, log.String())
		}
	}
	// The final snapshot is in the object store and restores.
	sc, err := parseServe(args[1:], &log)
	if err != nil {
		t.Fatal(err)
	}
	snaps, err := sc.snapshots(context.Background(), js.Conn())
	if err != nil {
		t.Fatal(err)
	}
	restored, cp := stream.LoadState(context.Background(), snaps, sc.eng.storeConfig(), zerolog.Nop())
	if restored == nil || restored.Len() != 1 || cp.Seq != 120 {
		t.Errorf("restored %v at sequence %d from %s, want one series at 120", restored != nil, cp.Seq, snaps)
	}
}
