package state

import (
	"errors"
	"sync"
)

// partition is one lock's worth of series: an index and a slab of series
// headers and bucket memory, grown in chunks and never shrunk.
type partition struct {
	mu     sync.Mutex
	index  index            // hash → slot reference
	spill  map[string]int32 // keys whose hash the index already gives to another key; rarely used
	chunks []*chunk
	free   []int32 // slot references of deleted series, reused first
	slots  int     // slots over all chunks

	_ [64]byte // keeps neighbouring partitions' locks off this cache line
}

// chunk holds the headers and the bucket memory of a run of series, as one
// array per field so that a series' buckets are contiguous and no series
// needs an allocation of its own.
type chunk struct {
	lay    *layout
	series []Series
	mean   []float32 // len(series) × buckets per series
	count  []uint16
	used   int // slots handed out, from the front
}

// A slot reference is chunk<<16 | index in chunk.
func slotRef(c, i int) int32 { return int32(c<<16 | i) }

func (p *partition) at(ref int32) *Series {
	return &p.chunks[ref>>16].series[ref&0xffff]
}

// lookup finds the series of k, verifying its text: two keys may share a
// hash.
func (p *partition) lookup(k Key) *Series {
	if ref, ok := p.index.get(k.Hash); ok {
		if s := p.at(ref); s.key == string(k.Text) {
			return s
		}
	}
	if len(p.spill) > 0 {
		if ref, ok := p.spill[string(k.Text)]; ok {
			return p.at(ref)
		}
	}
	return nil
}

// insert indexes a new series.
func (p *partition) insert(s *Series, ref int32) {
	if _, taken := p.index.get(s.hash); taken {
		if p.spill == nil {
			p.spill = make(map[string]int32)
		}
		p.spill[s.key] = ref
		return
	}
	p.index.put(s.hash, ref)
}

// remove unindexes the series of k and returns its slot reference.
func (p *partition) remove(k Key) (int32, bool) {
	if ref, ok := p.index.get(k.Hash); ok && p.at(ref).key == string(k.Text) {
		p.index.del(k.Hash)
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
// last chunk, else one of a new chunk. A new chunk adds an eighth to the
// partition's slots, at least firstChunk and at most chunkSize, so that a
// partition holds at most an eighth more slots than it ever needed (on
// average half that) whatever its size.
func (p *partition) alloc(chunkSize int, lay *layout) (int32, *Series, error) {
	if n := len(p.free); n > 0 {
		ref := p.free[n-1]
		p.free = p.free[:n-1]
		return ref, p.at(ref), nil
	}
	k := len(p.chunks) - 1
	if k < 0 || p.chunks[k].used == len(p.chunks[k].series) {
		if len(p.chunks) >= maxChunks {
			return 0, nil, errChunks
		}
		size := min(chunkSize, fillPages(max(firstChunk, p.slots/8), lay.buckets))
		p.chunks = append(p.chunks, &chunk{
			lay:    lay,
			series: make([]Series, size),
			mean:   make([]float32, size*lay.buckets),
			count:  make([]uint16, size*lay.buckets),
		})
		p.slots += size
		k++
	}
	c := p.chunks[k]
	i := c.used
	c.used++
	s := &c.series[i]
	s.ch, s.row = c, int32(i)
	return slotRef(k, i), s, nil
}

// allocPage is the granule in which the Go runtime hands out large objects.
const allocPage = 8 << 10

// fillPages rounds a chunk of size series up so that its array of means
// ends on an allocation page: the rest of the page would be lost anyway.
// Chunks small enough for the runtime's size classes are left as they are.
func fillPages(size, buckets int) int {
	row := buckets * 4 // bytes of means per series
	if bytes := size * row; bytes > 32<<10 {
		return (bytes + allocPage - 1) / allocPage * allocPage / row
	}
	return size
}
