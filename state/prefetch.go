//go:build !race

package state

// prefetch loads, for the points of one window, the memory their updates
// will need: index cells, then hot records, then the block header and
// finest ring line of points that will close buckets. Go has no prefetch
// instruction, but a load that misses only holds the processor up once
// its reorder buffer is full, so each step first works out the addresses,
// which misses nothing, and then touches them in a loop of a few
// instructions per line, which keeps dozens of misses in flight at once.
//
// It reads without the partition locks, racing with writers. That is sound
// because nothing read here is trusted:
//   - The index table and the chunk directory are reached through atomic
//     pointers to values whose slice headers never change; a chunk's slice
//     headers are set before it is published, and chunks never leave the
//     directory. So no read can leave the arrays.
//   - What it reads from those arrays (index cells, hot record fields) are
//     single aligned words written under the lock. A racy read sees some
//     value once written there, or on a machine without 64-bit loads a mix
//     of two, and every value is bounds-checked before it serves as an
//     index, so a stale or torn value only loads a useless line.
//   - The slot it finds for a key is a hint: under the lock, the apply
//     step uses it only if the slot's hot record holds the key's identity,
//     and otherwise looks the key up afresh.
//
// The race detector would rightly report these reads, so race builds use
// the no-op in prefetch_race.go; results never depend on prefetching.
func (s *Store) prefetch(es []Entry, h *hints) {
	n := len(es)
	var sink uint64
	// Index cells.
	for i := range n {
		h.cell[i] = nil
		if t := h.part[i].index.tab.Load(); t != nil {
			h.cell[i] = &t.cell[t.home(tagOf(es[i].Key.Hash))]
		}
	}
	for _, c := range h.cell[:n] {
		if c != nil {
			sink += *c
		}
	}
	// Hot records.
	for i := range n {
		h.hot[i] = nil
		c := h.cell[i]
		if c == nil {
			continue
		}
		tag := tagOf(es[i].Key.Hash)
		x := *c
		if uint32(x>>32) != tag {
			x = probe(h.part[i].index.tab.Load(), tag)
		}
		if x == 0 {
			continue
		}
		ref := uint32(x) - 1
		dir := h.part[i].dir.Load()
		if dir == nil || int(ref>>16) >= len(*dir) {
			continue
		}
		ch := (*dir)[ref>>16]
		row := int(ref & 0xffff)
		if row >= len(ch.hot) {
			continue
		}
		h.hot[i], h.c[i], h.row[i] = &ch.hot[row], ch, int32(row)
	}
	for _, p := range h.hot[:n] {
		if p != nil {
			sink += p.hash
		}
	}
	// Block headers and finest ring lines of points that will close
	// buckets.
	lay := s.cfg.lay
	w0 := lay.width[0]
	m := 0
	for i := range n {
		hp := h.hot[i]
		if hp == nil || hp.hash != es[i].Key.Hash {
			continue
		}
		ts, first := es[i].TS, hp.first
		if ts <= hp.clock || ts-lay.late < (first+1)*w0 {
			continue
		}
		ch, row := h.c[i], int(h.row[i])
		at := row * lay.blockBytes
		if at+lay.blockBytes > len(ch.blocks) {
			continue
		}
		h.header[m] = &ch.blocks[at]
		h.ring[m] = &ch.blocks[at+headerBytes+int(mod(first, lay.count[0])/perLine0)*cacheLine]
		m++
	}
	for i := range m {
		sink += uint64(*h.header[i]) + uint64(*h.ring[i])
	}
	h.sink = sink
}

// probe looks past the home cell for a cell with tag, reading at most a
// few cells; it returns 0 if it finds none.
func probe(t *table, tag uint32) uint64 {
	mask := uint64(len(t.cell) - 1)
	i := t.home(tag)
	for range 8 {
		i = (i + 1) & mask
		c := t.cell[i]
		if c == 0 || uint32(c>>32) == tag {
			return c
		}
	}
	return 0
}
