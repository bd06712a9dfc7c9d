package state

import (
	"errors"
	"sync"
	"sync/atomic"
)

// partition is one lock's worth of series: an index and a slab of series
// records and bucket memory, grown in chunks and never shrunk.
type partition struct {
	mu     sync.Mutex
	index  index            // tag → slot reference
	spill  map[string]int32 // keys whose hash the index already gives to another key; rarely used
	chunks []*chunk
	dir    atomic.Pointer[[]*chunk] // chunks as published to lock-free readers
	free   []int32                  // slot references of deleted series, reused first
	slots  int                      // slots over all chunks

	_ [64]byte // keeps neighbouring partitions' locks off this cache line
}

// chunk holds the records and the bucket memory of a run of series, as
// one array per kind so that the hot records are dense, a series' buckets
// are contiguous and no series needs an allocation of its own. Its slice
// headers never change once the chunk is published.
type chunk struct {
	lay    *layout
	hot    []hot // cache-line aligned
	series []Series
	extra  []extraSlot // open slots 2 and 3 of each series when the lateness needs them, else nil
	blocks []byte      // len(series) blocks of lay.blockBytes, cache-line aligned
	used   int         // slots handed out, from the front
}

// A slot reference is chunk<<16 | index in chunk.
func slotRef(c, i int) int32 { return int32(c<<16 | i) }

// at returns the chunk and row of a slot reference.
func (p *partition) at(ref int32) (*chunk, int) {
	return p.chunks[ref>>16], int(ref & 0xffff)
}

// find returns the slot of the series whose key has hash and check. When
// the index holds a different key with the same hash, clash is set.
func (p *partition) find(hash, check uint64) (ref int32, ok, clash bool) {
	t := p.index.tab.Load()
	if t == nil {
		return 0, false, false
	}
	tag := tagOf(hash)
	mask := uint64(len(t.cell) - 1)
	for i := t.home(tag); ; i = (i + 1) & mask {
		c := t.cell[i]
		if c == 0 {
			return 0, false, false
		}
		if uint32(c>>32) != tag {
			continue
		}
		r := int32(uint32(c) - 1)
		h := &p.chunks[r>>16].hot[r&0xffff]
		if h.hash == hash {
			return r, h.check == check, h.check != check
		}
	}
}

// lookup finds the series of k, whose Check is set. Keys whose hash
// collides with an indexed key of other text live in the spill map.
func (p *partition) lookup(k Key) (int32, bool) {
	if ref, ok, _ := p.find(k.Hash, k.Check); ok {
		return ref, true
	}
	if len(p.spill) > 0 {
		ref, ok := p.spill[string(k.Text)]
		return ref, ok
	}
	return 0, false
}

// insert indexes the new series of k in slot ref.
func (p *partition) insert(k Key, ref int32) {
	if _, ok, clash := p.find(k.Hash, k.Check); ok || clash {
		if p.spill == nil {
			p.spill = make(map[string]int32)
		}
		p.spill[string(k.Text)] = ref
		return
	}
	p.index.put(tagOf(k.Hash), ref)
}

// remove unindexes the series of k and returns its slot reference.
func (p *partition) remove(k Key) (int32, bool) {
	if ref, ok, _ := p.find(k.Hash, k.Check); ok {
		p.index.del(tagOf(k.Hash), ref)
		return ref, true
	}
	if ref, ok := p.spill[string(k.Text)]; ok {
		delete(p.spill, string(k.Text))
		if len(p.spill) == 0 {
			p.spill = nil
		}
		return ref, true
	}
	return 0, false
}

var errChunks = errors.New("state: partition out of chunk references")

// alloc hands out a slot: a freed one if any, else the next one of the
// last chunk, else one of a new chunk. A new chunk adds a sixteenth to the
// partition's slots, at least firstChunk and at most chunkSize, so that a
// partition holds at most a sixteenth more slots than it ever needed (on
// average half that) whatever its size.
func (p *partition) alloc(chunkSize int, lay *layout) (int32, error) {
	if n := len(p.free); n > 0 {
		ref := p.free[n-1]
		p.free = p.free[:n-1]
		return ref, nil
	}
	k := len(p.chunks) - 1
	if k < 0 || p.chunks[k].used == len(p.chunks[k].series) {
		if len(p.chunks) >= maxChunks {
			return 0, errChunks
		}
		p.chunks = append(p.chunks, newChunk(lay, min(chunkSize, fillPages(max(firstChunk, p.slots/16), lay.blockBytes))))
		// Elements below len are never written again, so readers of an
		// older header see them unchanged.
		dir := p.chunks
		p.dir.Store(&dir)
		p.slots += len(p.chunks[k+1].series)
		k++
	}
	c := p.chunks[k]
	i := c.used
	c.used++
	s := &c.series[i]
	s.ch, s.row = c, int32(i)
	return slotRef(k, i), nil
}

func newChunk(lay *layout, size int) *chunk {
	c := &chunk{
		lay:    lay,
		hot:    makeHot(size),
		series: make([]Series, size),
		blocks: makeLines(size * lay.blockBytes),
	}
	if lay.slots > 2 {
		c.extra = make([]extraSlot, size*(lay.slots-2))
	}
	return c
}

// allocPage is the granule in which the Go runtime hands out large objects.
const allocPage = 8 << 10

// fillPages rounds a chunk of size series up so that its blocks end on an
// allocation page: the rest of the page would be lost anyway. Chunks small
// enough for the runtime's size classes are left as they are.
func fillPages(size, blockBytes int) int {
	if bytes := size * blockBytes; bytes > 32<<10 {
		return (bytes + allocPage - 1) / allocPage * allocPage / blockBytes
	}
	return size
}
