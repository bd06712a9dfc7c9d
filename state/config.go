package state

import (
	"errors"
	"fmt"
	"time"
)

// Limits that keep the series header a fixed size and slot references in
// an int32.
const (
	maxLevels    = 4       // resolutions per layout
	maxChunkSize = 1 << 16 // series per chunk: the low 16 bits of a slot reference
	maxChunks    = 1 << 15 // chunks per partition: the high 15 bits
	openSlots    = 4       // finest buckets open at once: lateness ≤ 3 widths
	growthChunks = 192     // bound on the chunks smaller than ChunkSize in a partition
	firstChunk   = 16      // series in a partition's smallest chunks
)

// ErrTime rejects a timestamp so far from the epoch (beyond about ±285,000
// years) that bucket arithmetic could overflow.
var ErrTime = errors.New("timestamp out of range")

// Bounds that keep bucket arithmetic far from overflow and a chunk's
// memory allocatable.
const (
	maxAbsTime    = 1 << 53 // accepted timestamps, ms
	maxWidth      = 1 << 40 // bucket width, ms (about 35 years)
	maxBuckets    = 1 << 16 // buckets per series over all levels
	maxChunkMem   = 1 << 30 // bytes of bucket memory in one chunk
	maxPartitions = 1 << 16
)

// layout is the validated Config in the integer units the hot path uses.
// It is shared read-only by all series of a store.
type layout struct {
	levels  []Level
	width   [maxLevels]int64 // ms
	count   [maxLevels]int64
	n       int   // number of levels
	buckets int   // buckets per series over all levels
	late    int64 // lateness in ms
	slots   int   // open finest buckets a series needs: 2 up to one width of lateness, else 4
	// Where a series' bucket memory lies in its block (see block.go).
	blockBytes      int
	meanAt, countAt [maxLevels]int // of levels 1 and up
}

// config is the validated Config.
type config struct {
	lay        *layout
	partitions int
	maxSeries  int
	chunkSize  int
}

// validate fills defaults and checks cfg.
func validate(cfg Config) (config, error) {
	levels := cfg.Layout
	if len(levels) == 0 {
		levels = DefaultLayout()
	}
	if len(levels) > maxLevels {
		return config{}, fmt.Errorf("state: %d levels, at most %d are supported", len(levels), maxLevels)
	}
	lay := &layout{levels: append([]Level(nil), levels...), n: len(levels)}
	for i, l := range levels {
		if l.Width <= 0 || l.Width%time.Millisecond != 0 || l.Width.Milliseconds() > maxWidth {
			return config{}, fmt.Errorf("state: level %d: width %v is not a whole number of milliseconds in [1ms, 2^40ms]", i, l.Width)
		}
		if l.Count < 1 || l.Count > maxBuckets-lay.buckets {
			return config{}, fmt.Errorf("state: level %d: count %d: need at least 1 and at most %d buckets over all levels", i, l.Count, maxBuckets)
		}
		w := l.Width.Milliseconds()
		lay.width[i], lay.count[i] = w, int64(l.Count)
		lay.buckets += l.Count
		if i == 0 {
			continue
		}
		prev := lay.width[i-1]
		if w <= prev || w%prev != 0 {
			return config{}, fmt.Errorf("state: level %d: width %v is not a multiple of the previous width %v", i, l.Width, levels[i-1].Width)
		}
		// The finer ring must reach back at least one coarse bucket so
		// that a View can hand over between them at a coarse boundary.
		if span := lay.count[i-1] * prev; span < w {
			return config{}, fmt.Errorf("state: level %d covers %v, less than one bucket of level %d", i-1, time.Duration(span)*time.Millisecond, i)
		}
	}
	for i := 1; i < lay.n; i++ {
		// Each level must reach further back than the finer one, with room
		// to align the hand-over to the next coarser width.
		var next int64
		if i+1 < lay.n {
			next = lay.width[i+1]
		}
		if lay.count[i]*lay.width[i] < lay.count[i-1]*lay.width[i-1]+next {
			return config{}, fmt.Errorf("state: level %d does not reach far enough beyond level %d", i, i-1)
		}
	}

	late := cfg.Lateness
	switch {
	case late < 0:
		return config{}, fmt.Errorf("state: negative lateness %v", late)
	case late == 0:
		late = levels[0].Width
	case late%time.Millisecond != 0:
		return config{}, fmt.Errorf("state: lateness %v is not a whole number of milliseconds", late)
	case late > time.Duration(openSlots-1)*levels[0].Width:
		return config{}, fmt.Errorf("state: lateness %v exceeds %d finest buckets", late, openSlots-1)
	}
	lay.late = late.Milliseconds()
	lay.blockBytes = blockLayout(lay)
	// The open buckets run from floor((clock-late)/w) to floor(clock/w).
	lay.slots = 2
	if lay.late > lay.width[0] {
		lay.slots = openSlots
	}

	c := config{lay: lay, partitions: cfg.Partitions, maxSeries: cfg.MaxSeries, chunkSize: cfg.ChunkSize}
	if c.partitions == 0 {
		c.partitions = 64
	}
	if c.maxSeries == 0 {
		c.maxSeries = 1_000_000
	}
	if c.chunkSize == 0 {
		c.chunkSize = 1024
	}
	switch {
	case c.partitions < 1 || c.partitions > maxPartitions:
		return config{}, fmt.Errorf("state: %d partitions, need 1 to %d", c.partitions, maxPartitions)
	case c.maxSeries < 1:
		return config{}, fmt.Errorf("state: series limit %d, need at least 1", c.maxSeries)
	case c.chunkSize < 1 || c.chunkSize > maxChunkSize:
		return config{}, fmt.Errorf("state: chunk size %d outside [1, %d]", c.chunkSize, maxChunkSize)
	}
	if c.chunkSize*lay.blockBytes > maxChunkMem {
		return config{}, fmt.Errorf("state: chunk of %d series × %d buckets exceeds %d bytes", c.chunkSize, lay.buckets, maxChunkMem)
	}
	// One partition may hold every series if the hashes are skewed; its
	// chunks must stay addressable.
	if chunks := c.maxSeries/c.chunkSize + 1 + growthChunks; chunks >= maxChunks {
		return config{}, fmt.Errorf("state: chunk size %d too small for %d series", c.chunkSize, c.maxSeries)
	}
	return c, nil
}
