package state

import (
	"fmt"
	"math"
	"sync/atomic"
	"unsafe"
)

// Store holds every series of a process, split into partitions by key hash.
// Each partition has its own lock, so its methods are safe for concurrent
// use and goroutines working on different partitions never wait for each
// other.
type Store struct {
	cfg   config
	parts []partition
	mask  uint64       // len(parts)-1 when that is a power of two, else 0
	n     atomic.Int64 // live series over all partitions
	exp   expiry       // idle series expiry (expire.go)
}

// New returns an empty Store sized by cfg, after filling its defaults and
// checking it.
func New(cfg Config) (*Store, error) {
	c, err := validate(cfg)
	if err != nil {
		return nil, err
	}
	s := &Store{cfg: c, parts: make([]partition, c.partitions)}
	if n := c.partitions; n&(n-1) == 0 {
		s.mask = uint64(n - 1)
	}
	if err := s.exp.init(cfg.IdleExpiry, c.partitions); err != nil {
		return nil, err
	}
	return s, nil
}

// Add applies one point at ts (unix ms) with value v to the series of k,
// creating the series if it is new. When the point moves the series' clock
// far enough that finest buckets close, onClose, if not nil, is called once
// with the series, under its partition lock, after the closed buckets were
// rolled into the coarser levels and the point was applied; it must not
// call back into the Store.
//
// Add rejects non-finite values (ErrValue), points in a bucket that has
// already closed (ErrLate), timestamps beyond ±2^53 ms (ErrTime), new
// series beyond the limit (ErrSeriesCap) and points beyond 2^32-1 in one
// finest bucket of a series (ErrFull); the errors wrap these with detail
// and a refused point changes nothing. k.Text is read only when k.Check is
// zero or the series is new or its hash collides with another's, and
// copied only when the series is new.
func (s *Store) Add(k Key, ts int64, v float64, onClose func(*Series)) error {
	if err := checkPoint(ts, v); err != nil {
		return err
	}
	if k.Check == 0 {
		k.Check = checkHash(k.Text)
	}
	return s.add(s.part(k.Hash), k, ts, v, onClose)
}

// checkPoint refuses what no series accepts.
func checkPoint(ts int64, v float64) error {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return fmt.Errorf("%w: %v", ErrValue, v)
	}
	if ts > maxAbsTime || ts < -maxAbsTime {
		return fmt.Errorf("%w: %d ms", ErrTime, ts)
	}
	return nil
}

// add is Add after the checks, with k.Check set and p the partition of k.
func (s *Store) add(p *partition, k Key, ts int64, v float64, onClose func(*Series)) error {
	p.mu.Lock()
	defer p.mu.Unlock()
	return s.addLocked(p, k, ts, v, onClose, nil, 0)
}

// addLocked is add under p's lock. If hint is not nil, row of hint, a
// chunk of p, may hold the series: the identity in its hot record decides
// whether it does.
func (s *Store) addLocked(p *partition, k Key, ts int64, v float64, onClose func(*Series), hint *chunk, row int) error {
	c := hint
	if c != nil {
		// A freed slot's hot record is zero, which matches no key but
		// one whose hash and check are both zero.
		if h := &c.hot[row]; h.hash != k.Hash || h.check != k.Check || k.Hash|k.Check == 0 {
			c = nil
		}
	}
	if c == nil {
		ref, ok := p.lookup(k)
		if !ok {
			var err error
			if ref, err = s.create(p, k, ts, v); err != nil {
				return err
			}
		}
		c, row = p.at(ref)
	}
	closed, err := c.add(row, ts, v)
	if err != nil {
		return err
	}
	if s.exp.clocks != nil {
		s.exp.saw(s.partIndex(k.Hash), ts)
	}
	if closed && onClose != nil {
		onClose(&c.series[row])
	}
	return nil
}

// part returns the partition of hash: Partition(hash, n), without a
// division when n is a power of two.
func (s *Store) part(hash uint64) *partition {
	if s.mask != 0 || len(s.parts) == 1 {
		return &s.parts[hash&s.mask]
	}
	return &s.parts[Partition(hash, len(s.parts))]
}

// create makes the series of k, whose first point is (ts, v), and returns
// its slot reference.
func (s *Store) create(p *partition, k Key, ts int64, v float64) (int32, error) {
	if n := s.n.Add(1); n > int64(s.cfg.maxSeries) {
		s.n.Add(-1)
		return 0, fmt.Errorf("%w: %d series", ErrSeriesCap, s.cfg.maxSeries)
	}
	ref, err := p.alloc(s.cfg.chunkSize, s.cfg.lay)
	if err != nil {
		s.n.Add(-1)
		return 0, err
	}
	c, row := p.at(ref)
	c.reset(row, k, ts, v)
	p.insert(k, ref)
	return ref, nil
}

// Do runs fn on the series of k under its partition lock and reports
// whether the series exists. fn must not call back into the Store.
func (s *Store) Do(k Key, fn func(*Series)) bool {
	if k.Check == 0 {
		k.Check = checkHash(k.Text)
	}
	p := s.part(k.Hash)
	p.mu.Lock()
	defer p.mu.Unlock()
	ref, ok := p.lookup(k)
	if !ok {
		return false
	}
	c, row := p.at(ref)
	fn(&c.series[row])
	return true
}

// Range calls fn on each series of partition part, in slot order, under
// the partition lock, until fn returns false. fn must not call back into
// the Store; to delete, collect keys and call Delete afterwards. A part
// outside [0, Partitions()) visits nothing.
func (s *Store) Range(part int, fn func(*Series) bool) {
	if part < 0 || part >= len(s.parts) {
		return
	}
	p := &s.parts[part]
	p.mu.Lock()
	defer p.mu.Unlock()
	for _, c := range p.chunks {
		for i := range c.series[:c.used] {
			if se := &c.series[i]; se.live && !fn(se) {
				return
			}
		}
	}
}

// Delete removes the series of k and reports whether it existed. Its slot
// and bucket memory go to a free list for the next new series.
func (s *Store) Delete(k Key) bool {
	if k.Check == 0 {
		k.Check = checkHash(k.Text)
	}
	p := s.part(k.Hash)
	p.mu.Lock()
	defer p.mu.Unlock()
	ref, ok := p.remove(k)
	if !ok {
		return false
	}
	s.drop(p, ref)
	return true
}

// Len returns the number of live series.
func (s *Store) Len() int { return int(s.n.Load()) }

// Partitions returns the number of partitions.
func (s *Store) Partitions() int { return len(s.parts) }

// Layout returns a copy of the bucket layout in force.
func (s *Store) Layout() []Level {
	return append([]Level(nil), s.cfg.lay.levels...)
}

// indexEntryBytes estimates one index entry: an 8-byte cell at a load
// between three eighths and three quarters.
const indexEntryBytes = 16

// BytesPerSeries returns the memory a series is designed to take: its hot
// and cold records, its block of buckets (a float32 mean and a uint16
// count each, with a header line and padding), open slots beyond two if
// the lateness needs them, and an index entry; the key text and incidents
// come on top.
func (s *Store) BytesPerSeries() int {
	lay := s.cfg.lay
	return int(unsafe.Sizeof(hot{})+unsafe.Sizeof(Series{})) + lay.blockBytes +
		(lay.slots-2)*int(unsafe.Sizeof(extraSlot{})) + indexEntryBytes
}
