package stream

import (
	"bytes"
	"context"
	"io"
	"testing"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"
	"github.com/rs/zerolog"
)

// TestBucketSweep leaves the chunks of an upload that never finished in
// the snapshot bucket, as a process killed while uploading does: a sweep
// keeps them while they are recent and removes them once stale, and the
// snapshots themselves stay whole.
func TestBucketSweep(t *testing.T) {
	ctx := context.Background()
	emb, err := StartEmbedded(ctx, EmbeddedConfig{Port: -1, DataDir: t.TempDir(), Log: zerolog.Nop()})
	if err != nil {
		t.Fatal(err)
	}
	defer emb.Shutdown()
	nc, err := nats.Connect(emb.URL())
	if err != nil {
		t.Fatal(err)
	}
	defer nc.Close()
	js, err := jetstream.New(nc)
	if err != nil {
		t.Fatal(err)
	}
	b, err := OpenBucketSnapshots(ctx, js, "snaps", "node-a")
	if err != nil {
		t.Fatal(err)
	}
	want := bytes.Repeat([]byte("snapshot"), 50_000) // several chunks
	for range 2 {
		if err := b.Save(ctx, func(w io.Writer) error { _, err := w.Write(want); return err }); err != nil {
			t.Fatal(err)
		}
	}
	for i := range 3 {
		if _, err := js.Publish(ctx, "$O.snaps.C.ABANDONED", []byte{byte(i)}); err != nil {
			t.Fatal(err)
		}
	}
	chunks := func() (orphan, all uint64) {
		s, err := js.Stream(ctx, "OBJ_snaps")
		if err != nil {
			t.Fatal(err)
		}
		info, err := s.Info(ctx, jetstream.WithSubjectFilter("$O.snaps.C.>"))
		if err != nil {
			t.Fatal(err)
		}
		for subj, n := range info.State.Subjects {
			all += n
			if subj == "$O.snaps.C.ABANDONED" {
				orphan = n
			}
		}
		return orphan, all
	}
	orphan, before := chunks()
	if orphan != 3 {
		t.Fatalf("%d abandoned chunks before the sweep", orphan)
	}
	if err := b.sweep(ctx, js, time.Hour); err != nil {
		t.Fatal(err)
	}
	if o, _ := chunks(); o != 3 {
		t.Errorf("a recent upload lost chunks: %d left", o)
	}
	if err := b.sweep(ctx, js, 0); err != nil {
		t.Fatal(err)
	}
	if o, all := chunks(); o != 0 || all != before-3 {
		t.Errorf("after the sweep: %d abandoned chunks, %d in all (before %d)", o, all, before)
	}
	for _, prev := range []bool{false, true} {
		r, err := b.Load(ctx, prev)
		if err != nil {
			t.Fatal(err)
		}
		got, err := io.ReadAll(r)
		r.Close()
		if err != nil || !bytes.Equal(got, want) {
			t.Errorf("snapshot (previous %v) after the sweep: %d bytes, %v", prev, len(got), err)
		}
	}
}
