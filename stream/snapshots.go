package stream

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"

	"github.com/nats-io/nats.go/jetstream"
)

// Snapshots keeps the newest snapshot of a durable sidecar's state. Save
// replaces it only once the new one is complete, so a crash while saving
// leaves the previous one in place.
type Snapshots interface {
	// Save stores what write writes as the newest snapshot.
	Save(ctx context.Context, write func(io.Writer) error) error
	// Load opens the newest snapshot; it returns an error wrapping
	// ErrNoSnapshot when there is none.
	Load(ctx context.Context) (io.ReadCloser, error)
	// String names where snapshots go, for logs.
	String() string
}

// ErrNoSnapshot reports that no snapshot has been saved yet.
var ErrNoSnapshot = errors.New("no snapshot")

// DirSnapshots keeps the snapshot in a local file, Dir/Name.snapshot.
// It suits a sidecar whose bus is its own embedded server, on the same
// disk.
type DirSnapshots struct {
	Dir  string
	Name string // default "headroom"
}

func (d DirSnapshots) path() string {
	name := d.Name
	if name == "" {
		name = "headroom"
	}
	return filepath.Join(d.Dir, name+".snapshot")
}

func (d DirSnapshots) String() string { return d.path() }

// Save writes a temporary file beside the snapshot, syncs it and renames
// it over the snapshot, then syncs the directory, so that the snapshot is
// either the old one or the new one, whole, after a crash.
func (d DirSnapshots) Save(ctx context.Context, write func(io.Writer) error) error {
	if err := os.MkdirAll(d.Dir, 0o750); err != nil {
		return fmt.Errorf("stream: snapshot directory: %w", err)
	}
	f, err := os.CreateTemp(d.Dir, ".snapshot-*")
	if err != nil {
		return fmt.Errorf("stream: snapshot: %w", err)
	}
	tmp := f.Name()
	ok := false
	defer func() {
		if !ok {
			_ = f.Close()
			_ = os.Remove(tmp)
		}
	}()
	if err := write(f); err != nil {
		return err
	}
	if err := ctx.Err(); err != nil {
		return err
	}
	if err := f.Sync(); err != nil {
		return fmt.Errorf("stream: snapshot: %w", err)
	}
	if err := f.Close(); err != nil {
		return fmt.Errorf("stream: snapshot: %w", err)
	}
	if err := os.Rename(tmp, d.path()); err != nil {
		return fmt.Errorf("stream: snapshot: %w", err)
	}
	ok = true
	if dir, err := os.Open(d.Dir); err == nil {
		_ = dir.Sync()
		_ = dir.Close()
	}
	return nil
}

// Load opens the snapshot file.
func (d DirSnapshots) Load(ctx context.Context) (io.ReadCloser, error) {
	f, err := os.Open(d.path())
	if errors.Is(err, os.ErrNotExist) {
		return nil, fmt.Errorf("stream: %s: %w", d.path(), ErrNoSnapshot)
	}
	if err != nil {
		return nil, fmt.Errorf("stream: snapshot: %w", err)
	}
	return f, nil
}

// BucketSnapshots keeps the snapshot as object Name of a JetStream object
// store, so that a sidecar can restart on another node. A new version of
// an object replaces the old one only when it is complete.
type BucketSnapshots struct {
	Store  jetstream.ObjectStore
	Bucket string // the store's bucket name, for logs
	Name   string // default "headroom"
}

// OpenBucketSnapshots returns the snapshots kept as object name in bucket,
// creating the bucket (file storage) when it is missing.
func OpenBucketSnapshots(ctx context.Context, js jetstream.JetStream, bucket, name string) (BucketSnapshots, error) {
	st, err := js.ObjectStore(ctx, bucket)
	if errors.Is(err, jetstream.ErrBucketNotFound) {
		st, err = js.CreateObjectStore(ctx, jetstream.ObjectStoreConfig{
			Bucket:      bucket,
			Description: "headroom state snapshots",
		})
	}
	if err != nil {
		return BucketSnapshots{}, fmt.Errorf("stream: snapshot bucket %s: %w", bucket, err)
	}
	return BucketSnapshots{Store: st, Bucket: bucket, Name: name}, nil
}

func (b BucketSnapshots) name() string {
	if b.Name == "" {
		return "headroom"
	}
	return b.Name
}

func (b BucketSnapshots) String() string {
	return "object " + b.name() + " of bucket " + b.Bucket
}

// Save streams the snapshot into the object store through a pipe.
func (b BucketSnapshots) Save(ctx context.Context, write func(io.Writer) error) error {
	if b.Store == nil {
		return errors.New("stream: snapshot bucket not set")
	}
	pr, pw := io.Pipe()
	done := make(chan error, 1)
	go func() {
		err := write(pw)
		pw.CloseWithError(err) // nil closes cleanly
		done <- err
	}()
	_, err := b.Store.Put(ctx, jetstream.ObjectMeta{Name: b.name()}, pr)
	// The writer sees a closed pipe if Put gave up early.
	pr.CloseWithError(errors.New("stream: snapshot upload stopped"))
	werr := <-done
	if werr != nil {
		return werr
	}
	if err != nil {
		return fmt.Errorf("stream: snapshot upload: %w", err)
	}
	return nil
}

// Load opens the snapshot object.
func (b BucketSnapshots) Load(ctx context.Context) (io.ReadCloser, error) {
	if b.Store == nil {
		return nil, errors.New("stream: snapshot bucket not set")
	}
	r, err := b.Store.Get(ctx, b.name())
	if errors.Is(err, jetstream.ErrObjectNotFound) {
		return nil, fmt.Errorf("stream: %s: %w", b, ErrNoSnapshot)
	}
	if err != nil {
		return nil, fmt.Errorf("stream: snapshot: %w", err)
	}
	return r, nil
}
