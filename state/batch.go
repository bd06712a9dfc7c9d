package state

// window is how many points of a batch have their memory accesses
// overlapped: enough to keep the processor's misses in flight, few enough
// that the lines fetched stay in the first-level cache until used.
const window = 32

// hints is what the prefetch passes learn about the points of one window.
// Apart from part and check, which AddBatch computes itself, every field is
// a guess read without the partition lock: it is used to load memory early
// and, for the slot of the series, checked under the lock before use.
type hints struct {
	part  [window]*partition
	check [window]uint64
	cell  [window]*uint64 // home cell of the key's tag
	hot   [window]*hot    // hot record the index seems to give the key
	c     [window]*chunk
	row   [window]int32
	// Lines of the points that will close buckets: block header and
	// finest ring.
	header [window]*byte
	ring   [window]*byte
	sink   uint64
}

// AddBatch applies points in order per series with the same semantics as
// Add, overlapping the memory accesses of different points: for each run of
// points it first loads their index cells, then their hot records, then the
// block header and finest ring line of those about to close buckets, each
// pass issuing independent loads that the processor serves in parallel,
// and only then applies the points one by one, in order, under their
// partition locks.
//
// Each entry's Err is set to what Add would return for it (nil when the
// point was applied), and onClose is called as Add calls it: the outcome,
// entry for entry and call for call, is that of calling Add for each entry
// in order. The result is the number of points applied. AddBatch changes
// nothing in es but the Err fields; the key texts need only stay valid
// during the call.
func (s *Store) AddBatch(es []Entry, onClose func(*Series)) (applied int) {
	var h hints
	// Consecutive points of one partition share a lock acquisition.
	var held *partition
	defer func() {
		if held != nil {
			held.mu.Unlock()
		}
	}()
	for len(es) > 0 {
		w := es[:min(len(es), window)]
		es = es[len(w):]
		for i := range w {
			k := &w[i].Key
			h.check[i] = k.Check
			if k.Check == 0 {
				h.check[i] = checkHash(k.Text)
			}
			h.part[i] = s.part(k.Hash)
		}
		s.prefetch(w, &h)
		for i := range w {
			e := &w[i]
			if e.Err = checkPoint(e.TS, e.Value); e.Err != nil {
				continue
			}
			if p := h.part[i]; p != held {
				if held != nil {
					held.mu.Unlock()
				}
				held = p
				p.mu.Lock()
			}
			k := e.Key
			k.Check = h.check[i]
			var hint *chunk
			if h.hot[i] != nil {
				hint = h.c[i]
			}
			if e.Err = s.addLocked(held, k, e.TS, e.Value, onClose, hint, int(h.row[i])); e.Err == nil {
				applied++
			}
		}
		// Release between windows, so that a long batch does not keep
		// one partition from others.
		if held != nil {
			held.mu.Unlock()
			held = nil
		}
	}
	return applied
}
