package main

import (
	"bufio"
	"context"
	"encoding/json"
	"fmt"
	"io"
	"os"
	"os/exec"
	"strings"
	"syscall"
	"testing"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/rs/zerolog"

	"github.com/headroom-dev/headroom/state"
	"github.com/headroom-dev/headroom/stream"
)

// BenchmarkRestart measures `headroom serve --durable` restarting with
// 100,000 series: from process start until it ingests again (restoring
// the snapshot is most of it), and its graceful stop after one more
// message, most of which is the final snapshot written and synced to
// disk. A snapshot's size does not depend on how full the series are
// (their bucket memory is written whole), so the series here hold a day
// of hourly points.
func BenchmarkRestart(b *testing.B) {
	const nSeries = 100_000
	snapDir := b.TempDir()
	store, err := state.New(state.Config{})
	if err != nil {
		b.Fatal(err)
	}
	start := time.Now().Add(-48 * time.Hour).Truncate(time.Hour).UnixMilli()
	var key []byte
	for i := range nSeries {
		labels := []state.Label{{Name: []byte("host"), Value: fmt.Appendf(nil, "node-%d", i)}}
		k := state.MakeKey(key, []byte("volume_used_ratio"), labels)
		key = k.Text
		for h := range 24 {
			if err := store.Add(k, start+int64(h)*3_600_000, float64(h), nil); err != nil {
				b.Fatal(err)
			}
		}
	}
	err = stream.DirSnapshots{Dir: snapDir}.Save(context.Background(), func(w io.Writer) error {
		return stream.WriteSnapshot(w, store, stream.Checkpoint{Rules: []string{}})
	})
	if err != nil {
		b.Fatal(err)
	}
	info, err := os.Stat(snapDir + "/headroom.snapshot")
	if err != nil {
		b.Fatal(err)
	}
	store = nil

	emb, err := stream.StartEmbedded(context.Background(), stream.EmbeddedConfig{Port: -1, DataDir: b.TempDir(), Log: zerolog.Nop()})
	if err != nil {
		b.Fatal(err)
	}
	defer emb.Shutdown()
	nc, err := nats.Connect(emb.URL())
	if err != nil {
		b.Fatal(err)
	}
	defer nc.Close()
	args := []string{"serve", "--nats", emb.URL(), "--durable", "--snapshot-dir", snapDir, "--snapshot-every", "1h"}
	b.ResetTimer()
	var ready, restore, stop time.Duration
	for range b.N {
		r, rs, s := serveTimes(b, args, func() {
			p := fmt.Sprintf(`{"metric":"volume_used_ratio","labels":{"host":"node-1"},"ts":%d,"value":1}`, time.Now().Add(-time.Hour).UnixMilli())
			if err := nc.Publish("headroom.points.bench", []byte(p)); err != nil {
				b.Fatal(err)
			}
		})
		ready, restore, stop = ready+r, restore+rs, stop+s
	}
	b.StopTimer()
	n := float64(b.N)
	b.ReportMetric(ready.Seconds()/n, "s-to-ingest")
	b.ReportMetric(restore.Seconds()/n, "s-restore")
	b.ReportMetric(stop.Seconds()/n, "s-stop")
	b.ReportMetric(float64(info.Size())/1e6, "MB-snapshot")
}

// serveTimes runs serve once: it returns the time from start to ingesting,
// the restore time serve logged, and, after send, the time its graceful
// stop took.
func serveTimes(b *testing.B, args []string, send func()) (ready, restore, stop time.Duration) {
	b.Helper()
	cmd := exec.Command(os.Args[0], args...)
	cmd.Env = append(os.Environ(), runMainEnv+"=1")
	out, err := cmd.StderrPipe()
	if err != nil {
		b.Fatal(err)
	}
	began := time.Now()
	if err := cmd.Start(); err != nil {
		b.Fatal(err)
	}
	defer func() { _ = cmd.Process.Kill() }()
	sc := bufio.NewScanner(out)
	sc.Buffer(make([]byte, 1<<20), 1<<20)
	var log strings.Builder
	for sc.Scan() {
		line := sc.Text()
		log.WriteString(line + "\n")
		if strings.Contains(line, `"state restored"`) {
			var l struct {
				Took float64 `json:"took"` // ms, zerolog's default
				N    int     `json:"series"`
			}
			if err := json.Unmarshal([]byte(line), &l); err != nil || l.N == 0 {
				b.Fatalf("restore line %s: %v", line, err)
			}
			restore = time.Duration(l.Took * float64(time.Millisecond))
		}
		if strings.Contains(line, `"ingesting durably"`) {
			ready = time.Since(began)
			break
		}
	}
	if ready == 0 || restore == 0 {
		b.Fatalf("serve did not restore and ingest: %s", log.String())
	}
	send()
	time.Sleep(200 * time.Millisecond) // time to apply it
	stopAt := time.Now()
	if err := cmd.Process.Signal(syscall.SIGTERM); err != nil {
		b.Fatal(err)
	}
	for sc.Scan() { // to the end of its output: it has exited
	}
	stop = time.Since(stopAt)
	if err := cmd.Wait(); err != nil {
		b.Fatalf("serve: %v", err)
	}
	return ready, restore, stop
}
