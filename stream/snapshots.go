package stream

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"time"

	"github.com/nats-io/nats.go/jetstream"
)

// Snapshots keeps the two newest snapshots of a durable sidecar's state.
// Save replaces the older only once the new one is complete, so a crash
// while saving leaves both in place, and a newest snapshot that turns out
// damaged can be passed over for the one before it.
type Snapshots interface {
	// Save stores what write writes as the newest snapshot.
	Save(ctx context.Context, write func(io.Writer) error) error
	// Load opens the newest snapshot, or with previous set the one before
	// it; it returns an error wrapping ErrNoSnapshot when there is none.
	Load(ctx context.Context, previous bool) (io.ReadCloser, error)
	// String names where snapshots go, for logs.
	String() string
}

// ErrNoSnapshot reports that no snapshot has been saved yet.
var ErrNoSnapshot = errors.New("no snapshot")

// DirSnapshots keeps the newest snapshot in a local file,
// Dir/Name.snapshot, and the one before it in Dir/Name.snapshot.prev. It
// suits a sidecar whose bus is its own embedded server, on the same disk.
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

// Save writes a temporary file beside the snapshot and syncs it, renames
// the snapshot to the previous one and the temporary file to the
// snapshot, then syncs the directory. After a crash at any point, each
// file is whole: between the renames there is a previous snapshot and no
// newest, which Load reports as none so that the caller falls back.
func (d DirSnapshots) Save(ctx context.Context, write func(io.Writer) error) error {
	if err := os.MkdirAll(d.Dir, 0o750); err != nil {
		return fmt.Errorf("stream: snapshot directory: %w", err)
	}
	// A process killed while writing leaves its temporary file behind,
	// as large as a snapshot; there is one writer per name, so any such
	// file is stale.
	tmpPattern := "." + filepath.Base(d.path()) + "-*"
	if stale, err := filepath.Glob(filepath.Join(d.Dir, tmpPattern)); err == nil {
		for _, name := range stale {
			_ = os.Remove(name)
		}
	}
	f, err := os.CreateTemp(d.Dir, tmpPattern)
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
	if err := os.Rename(d.path(), d.path()+".prev"); err != nil && !errors.Is(err, os.ErrNotExist) {
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

// Load opens the snapshot file or the previous one.
func (d DirSnapshots) Load(ctx context.Context, previous bool) (io.ReadCloser, error) {
	path := d.path()
	if previous {
		path += ".prev"
	}
	f, err := os.Open(path)
	if errors.Is(err, os.ErrNotExist) {
		return nil, fmt.Errorf("stream: %s: %w", path, ErrNoSnapshot)
	}
	if err != nil {
		return nil, fmt.Errorf("stream: snapshot: %w", err)
	}
	return f, nil
}

// BucketSnapshots keeps the snapshots as objects Name.0 and Name.1 of a
// JetStream object store, so that a sidecar can restart on another node.
// Save writes over the older of the two, and a new version of an object
// replaces the old one only when it is complete; Load tells them apart by
// modification time.
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
	b := BucketSnapshots{Store: st, Bucket: bucket, Name: name}
	if err := b.sweep(ctx, js, staleUpload); err != nil {
		return BucketSnapshots{}, err
	}
	return b, nil
}

// staleUpload is how long after its last chunk an upload without an
// object counts as abandoned: uploads take seconds.
const staleUpload = 10 * time.Minute

// sweep removes the chunks of uploads that never completed, which a
// process killed while uploading leaves in the bucket's stream, each as
// large as a snapshot. It relies on the object store's layout, chunks of
// object n under $O.<bucket>.C.<n's NUID>, and runs at start. Another
// sidecar sharing the bucket may be uploading, so only chunks last
// written more than age ago go.
func (b BucketSnapshots) sweep(ctx context.Context, js jetstream.JetStream, age time.Duration) error {
	keep := map[string]bool{}
	infos, err := b.Store.List(ctx)
	if err != nil && !errors.Is(err, jetstream.ErrNoObjectsFound) {
		return fmt.Errorf("stream: snapshot bucket %s: %w", b.Bucket, err)
	}
	for _, info := range infos {
		keep["$O."+b.Bucket+".C."+info.NUID] = true
	}
	s, err := js.Stream(ctx, "OBJ_"+b.Bucket)
	if err != nil {
		return fmt.Errorf("stream: snapshot bucket %s: %w", b.Bucket, err)
	}
	info, err := s.Info(ctx, jetstream.WithSubjectFilter("$O."+b.Bucket+".C.>"))
	if err != nil {
		return fmt.Errorf("stream: snapshot bucket %s: %w", b.Bucket, err)
	}
	for subj := range info.State.Subjects {
		if keep[subj] {
			continue
		}
		last, err := s.GetLastMsgForSubject(ctx, subj)
		if err != nil || time.Since(last.Time) < age {
			continue
		}
		if err := s.Purge(ctx, jetstream.WithPurgeSubject(subj)); err != nil {
			return fmt.Errorf("stream: snapshot bucket %s: removing an unfinished upload: %w", b.Bucket, err)
		}
	}
	return nil
}

func (b BucketSnapshots) name() string {
	if b.Name == "" {
		return "headroom"
	}
	return b.Name
}

func (b BucketSnapshots) String() string {
	return "objects " + b.name() + ".0 and .1 of bucket " + b.Bucket
}

// slots returns the object names of the newest and the previous
// snapshot; a name is empty when that snapshot does not exist.
func (b BucketSnapshots) slots(ctx context.Context) (newest, previous string, err error) {
	var at [2]time.Time
	var names [2]string
	for i := range names {
		name := fmt.Sprintf("%s.%d", b.name(), i)
		info, err := b.Store.GetInfo(ctx, name)
		if errors.Is(err, jetstream.ErrObjectNotFound) {
			continue
		}
		if err != nil {
			return "", "", fmt.Errorf("stream: snapshot %s: %w", name, err)
		}
		names[i], at[i] = name, info.ModTime
	}
	if names[1] != "" && (names[0] == "" || at[1].After(at[0])) {
		return names[1], names[0], nil
	}
	return names[0], names[1], nil
}

// Save streams the snapshot into the object store through a pipe, over
// the older snapshot.
func (b BucketSnapshots) Save(ctx context.Context, write func(io.Writer) error) error {
	if b.Store == nil {
		return errors.New("stream: snapshot bucket not set")
	}
	newest, _, err := b.slots(ctx)
	if err != nil {
		return err
	}
	target := b.name() + ".0"
	if newest == target {
		target = b.name() + ".1"
	}
	pr, pw := io.Pipe()
	done := make(chan error, 1)
	go func() {
		err := write(pw)
		pw.CloseWithError(err) // nil closes cleanly
		done <- err
	}()
	_, err = b.Store.Put(ctx, jetstream.ObjectMeta{Name: target}, pr)
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

// Load opens the newest snapshot object or the previous one.
func (b BucketSnapshots) Load(ctx context.Context, previous bool) (io.ReadCloser, error) {
	if b.Store == nil {
		return nil, errors.New("stream: snapshot bucket not set")
	}
	newest, prev, err := b.slots(ctx)
	if err != nil {
		return nil, err
	}
	name := newest
	if previous {
		name = prev
	}
	if name == "" {
		return nil, fmt.Errorf("stream: %s: %w", b, ErrNoSnapshot)
	}
	r, err := b.Store.Get(ctx, name)
	if errors.Is(err, jetstream.ErrObjectNotFound) {
		return nil, fmt.Errorf("stream: %s: %w", b, ErrNoSnapshot)
	}
	if err != nil {
		return nil, fmt.Errorf("stream: snapshot: %w", err)
	}
	return r, nil
}
