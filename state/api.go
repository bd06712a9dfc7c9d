package state

// This file holds the layout, the configuration and the errors of a Store.

import (
	"errors"
	"time"
)

// Level is one bucket resolution.
type Level struct {
	Width time.Duration // bucket width
	Count int           // buckets kept
}

// DefaultLayout keeps two hours of one-minute buckets, a day of fifteen-minute
// buckets and two weeks of hourly buckets: 552 buckets per series.
func DefaultLayout() []Level {
	return []Level{
		{Width: time.Minute, Count: 120},
		{Width: 15 * time.Minute, Count: 96},
		{Width: time.Hour, Count: 336},
	}
}

// Config sizes a Store. Zero fields take the defaults.
type Config struct {
	Layout     []Level       // finest first; each width a multiple of the previous; default DefaultLayout()
	Partitions int           // default 64
	MaxSeries  int           // limit over all partitions; default 1,000,000
	Lateness   time.Duration // how far behind its newest point a series accepts points; default one finest bucket; at most three
	ChunkSize  int           // series per slab chunk allocated at once; default 1024
	IdleExpiry time.Duration // Expire removes series idle longer than this, in event time (see Expire); 0 never
}

// Errors a point can be rejected with. Callers test them with errors.Is; the
// returned errors wrap them with detail.
var (
	ErrLate      = errors.New("point older than the open buckets")
	ErrValue     = errors.New("value is NaN or infinite")
	ErrSeriesCap = errors.New("series limit reached")
)

// Entry is one point for AddBatch; Err is set when the point is refused.
type Entry struct {
	Key   Key
	TS    int64 // unix ms
	Value float64
	Err   error
}

// ErrFull rejects a point whose finest bucket already holds 2^32-1 points
// of its series.
var ErrFull = errors.New("bucket holds as many points as it can")
