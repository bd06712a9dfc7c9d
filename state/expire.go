package state

import (
	"fmt"
	"math"
	"sync"
	"sync/atomic"
	"time"
)

// Idle series expiry.
//
// Idleness is measured in event time: a series is idle when its clock
// lags the newest timestamp the store has applied by more than
// IdleExpiry. Wall time would remove every series when ingest stalls and
// could not replay old data; event time does neither. The reference is
// the store's newest point, not its partition's, so that whether a series
// expires does not depend on where its hash lands, and a partition that
// no longer receives points still sees its idle series go. Each partition
// keeps its own newest timestamp, written under its lock, and a sweep
// takes the maximum, so that no cache line is written by all partitions.
//
// A sweep visits a bounded number of slots, resuming where the previous
// call stopped, and holds each partition lock for at most sweepStep slots
// at a time, so that a periodic call never holds ingest up for long.

const (
	sweepShare = 64   // a call visits about 1/sweepShare of the live series...
	sweepMin   = 1024 // ...and at least this many slots
	sweepStep  = 256  // slots visited per hold of a partition lock
)

// expiry is the expiry state of a Store.
type expiry struct {
	after  int64       // IdleExpiry in ms; 0 never expires
	clocks []partClock // newest timestamp applied per partition; nil when after is 0

	mu               sync.Mutex // one sweep at a time; guards the cursor
	part, chunk, row int        // the slot the next sweep starts at
}

// partClock is the newest timestamp applied to one partition, or
// math.MinInt64 before any. Only its partition's lock holder writes it; a
// sweep reads it without that lock. It fills a cache line so that
// partitions do not write each other's.
type partClock struct {
	t atomic.Int64
	_ [cacheLine - 8]byte
}

// init checks d and sets e up for a store of n partitions.
func (e *expiry) init(d time.Duration, n int) error {
	switch {
	case d < 0:
		return fmt.Errorf("state: negative idle expiry %v", d)
	case d%time.Millisecond != 0:
		return fmt.Errorf("state: idle expiry %v is not a whole number of milliseconds", d)
	case d == 0:
		return nil
	}
	e.after = d.Milliseconds()
	e.clocks = make([]partClock, n)
	for i := range e.clocks {
		e.clocks[i].t.Store(math.MinInt64)
	}
	return nil
}

// saw records that a point at ts was applied to partition part. The
// caller holds that partition's lock.
func (e *expiry) saw(part int, ts int64) {
	if c := &e.clocks[part].t; ts > c.Load() {
		c.Store(ts)
	}
}

// partIndex returns the index of s.part(hash).
func (s *Store) partIndex(hash uint64) int {
	if s.mask != 0 || len(s.parts) == 1 {
		return int(hash & s.mask)
	}
	return Partition(hash, len(s.parts))
}

// newest returns the newest timestamp the store has applied, or
// math.MinInt64 if none (or if expiry is off).
func (s *Store) newest() int64 {
	t := int64(math.MinInt64)
	for i := range s.exp.clocks {
		t = max(t, s.exp.clocks[i].t.Load())
	}
	return t
}

// Expire removes series idle for longer than Config.IdleExpiry and returns
// how many it removed; with no IdleExpiry it does nothing. A series is idle
// for as long as its clock lags the reference, which is the newest
// timestamp the store has applied, but at most now (unix ms). Passing the
// wall clock as now keeps one point stamped far in the future from making
// every other series look idle; passing math.MaxInt64 measures in event
// time alone. A series exactly IdleExpiry behind stays.
//
// Each call visits a share of the slots, as many as a sixty-fourth of the
// live series and at least 1024, resuming where the previous call
// stopped, and holds a partition lock for at most 256 slots at a time:
// calling it every few seconds keeps the store swept without holding
// ingest up. A series goes within one pass of the slots after it has been
// idle too long; a pass takes about 64 calls, more while many slots are
// free after a wave of removals. Removed series free their slots for new
// ones, as Delete does, and one that receives a point again starts
// afresh. Expire is safe for concurrent use; concurrent calls sweep one
// after the other.
func (s *Store) Expire(now int64) int { return s.expire(now, false) }

// expire is Expire, or with all set ExpireAll.
func (s *Store) expire(now int64, all bool) int {
	e := &s.exp
	if e.after == 0 {
		return 0
	}
	e.mu.Lock()
	defer e.mu.Unlock()
	ref := min(now, s.newest())
	if ref < -maxAbsTime {
		return 0 // nothing applied yet, or now before any timestamp a series can have
	}
	cutoff := ref - e.after // cannot overflow: |ref| ≤ 2^53 and after < 2^44
	budget := max(sweepMin, s.Len()/sweepShare)
	if all {
		// One whole pass from the first slot, which leaves the cursor
		// there for the next call.
		e.part, e.chunk, e.row = 0, 0, 0
		budget = math.MaxInt
	}
	removed := 0
	// A lock counts as a slot, so that a store of empty partitions costs
	// no more than a full one; one pass at most per call.
	for done := 0; budget > 0 && done < len(s.parts); {
		visited, n, end := s.sweep(&s.parts[e.part], cutoff, min(budget, sweepStep))
		removed += n
		budget -= visited + 1
		if end {
			e.part, e.chunk, e.row = (e.part+1)%len(s.parts), 0, 0
			done++
		}
	}
	return removed
}

// sweep visits up to budget slots of p from the cursor under p's lock,
// removing the live series whose clock is before cutoff. It returns the
// slots visited, the series removed and whether it reached the end of p.
// The caller holds s.exp.mu.
func (s *Store) sweep(p *partition, cutoff int64, budget int) (visited, removed int, end bool) {
	e := &s.exp
	p.mu.Lock()
	defer p.mu.Unlock()
	for ; e.chunk < len(p.chunks); e.chunk, e.row = e.chunk+1, 0 {
		c := p.chunks[e.chunk]
		for ; e.row < c.used; e.row++ {
			if visited == budget {
				return visited, removed, false
			}
			visited++
			// The clock sits in the hot record, the dense array, so a
			// series in use costs one line; live is only read for the
			// few that look idle, free slots included.
			h := &c.hot[e.row]
			if h.clock >= cutoff || !c.series[e.row].live {
				continue
			}
			ref := slotRef(e.chunk, e.row)
			if p.unindex(h, c.series[e.row].key, ref) {
				s.drop(p, ref)
				removed++
			}
		}
	}
	return visited, removed, true
}

// unindex removes the series in slot ref, whose hot record is h and key
// text key, from p's index or spill map, and reports whether it was there.
// Unlike remove it needs no Key, so it allocates nothing.
func (p *partition) unindex(h *hot, key string, ref int32) bool {
	if r, ok, _ := p.find(h.hash, h.check); ok && r == ref {
		return p.index.del(tagOf(h.hash), ref)
	}
	if r, ok := p.spill[key]; ok && r == ref {
		delete(p.spill, key)
		if len(p.spill) == 0 {
			p.spill = nil
		}
		return true
	}
	return false
}

// drop frees slot ref of p, whose series has left the index: its record
// is cleared and the slot goes to the free list for the next new series.
func (s *Store) drop(p *partition, ref int32) {
	c, row := p.at(ref)
	se := &c.series[row]
	*se = Series{ch: se.ch, row: se.row, incidents: se.incidents[:0]}
	c.hot[row] = hot{} // matches no key; reset clears the rest for the next series
	p.free = append(p.free, ref)
	s.n.Add(-1)
}

// ExpireAll is Expire over every slot in one call, from the first: which
// series it removes depends only on the store's contents and now, not on
// where earlier sweeps stopped or how slots are laid out, so a caller
// that calls it at the same points of the same input removes the same
// series. Durable ingest relies on that to replay exactly. It still holds
// a partition lock for at most 256 slots at a time, and costs about 15 ns
// per slot.
func (s *Store) ExpireAll(now int64) int { return s.expire(now, true) }
