package state

import "sync/atomic"

// index maps series to slot references. It is an open-addressing table
// with linear probing whose cells are 8 bytes: a 32-bit tag derived from
// the hash and the slot reference, so that a partition's table takes half
// the cache a full hash per cell would, and a lookup usually reads one
// line. A tag match is confirmed against the full hash and check in the
// series' hot record, which the point needs next anyway. Deletion shifts
// later cells back instead of leaving tombstones.
//
// The table is published through an atomic pointer and never resized in
// place, so that batch prefetching may read it without the partition lock
// (see prefetch.go); cells are only written under the lock.
type index struct {
	tab atomic.Pointer[table]
	n   int
}

// table is one generation of the index. Its slice header never changes.
type table struct {
	cell  []uint64 // tag<<32 | (slot reference + 1); 0 when free
	shift uint     // 32 - log2(len(cell))
}

// tagOf is the high half of the Fibonacci hash of hash: its top bits
// pick the home cell, so the partition, which fixes hash mod Partitions,
// does not bias it, and a table can grow from the tags alone.
func tagOf(hash uint64) uint32 {
	return uint32((hash * 0x9e3779b97f4a7c15) >> 32)
}

func cellOf(tag uint32, ref int32) uint64 {
	return uint64(tag)<<32 | uint64(uint32(ref)+1)
}

// home is the preferred cell of tag.
func (t *table) home(tag uint32) uint64 {
	return uint64(tag >> t.shift)
}

// put adds the slot reference ref under tag. Tags may repeat.
func (x *index) put(tag uint32, ref int32) {
	t := x.tab.Load()
	if t == nil || (x.n+1)*4 > len(t.cell)*3 {
		t = x.grow(t)
	}
	t.insert(cellOf(tag, ref))
	x.n++
}

func (t *table) insert(c uint64) {
	mask := uint64(len(t.cell) - 1)
	i := t.home(uint32(c >> 32))
	for t.cell[i] != 0 {
		i = (i + 1) & mask
	}
	t.cell[i] = c
}

// del removes ref under tag, moving back the cells that probed past it
// so that no lookup stops early. It reports whether ref was there.
func (x *index) del(tag uint32, ref int32) bool {
	t := x.tab.Load()
	if t == nil {
		return false
	}
	want := cellOf(tag, ref)
	mask := uint64(len(t.cell) - 1)
	i := t.home(tag)
	for ; t.cell[i] != want; i = (i + 1) & mask {
		if t.cell[i] == 0 {
			return false
		}
	}
	x.n--
	for j := (i + 1) & mask; t.cell[j] != 0; j = (j + 1) & mask {
		// Move cell j into the hole at i unless its home lies cyclically
		// in (i, j], where it would no longer be found.
		h := t.home(uint32(t.cell[j] >> 32))
		if (j-h)&mask >= (j-i)&mask {
			t.cell[i] = t.cell[j]
			i = j
		}
	}
	t.cell[i] = 0
	return true
}

// grow publishes a table of twice the size of old (or the first one)
// holding old's cells, and returns it.
func (x *index) grow(old *table) *table {
	size := 16
	if old != nil {
		size = 2 * len(old.cell)
	}
	t := &table{cell: make([]uint64, size), shift: 32}
	for s := size; s > 1; s >>= 1 {
		t.shift--
	}
	if old != nil {
		for _, c := range old.cell {
			if c != 0 {
				t.insert(c)
			}
		}
	}
	x.tab.Store(t)
	return t
}

// len returns the number of entries.
func (x *index) len() int { return x.n }
