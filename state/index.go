package state

// index maps a series hash to its slot reference. It is an open-addressing
// table with linear probing whose entries hold the hash itself, so that a
// lookup usually reads one cache line: on the ingest path the index probe is
// followed by the series header and its key text, and every line saved there
// is a memory round trip saved per point. Deletion shifts later entries back
// instead of leaving tombstones.
type index struct {
	e     []entry // power-of-two length, or nil while empty
	n     int
	shift uint // 64 - log2(len(e))
}

// entry is one table cell; ref is the slot reference plus one, 0 when free.
type entry struct {
	hash uint64
	ref  int32
}

// home is the preferred cell of hash: Fibonacci hashing takes the high bits
// of the product, so the partition, which fixes hash mod Partitions, does
// not bias it.
func (x *index) home(hash uint64) uint64 {
	return (hash * 0x9e3779b97f4a7c15) >> x.shift
}

// get returns the slot reference of hash.
func (x *index) get(hash uint64) (int32, bool) {
	if x.n == 0 {
		return 0, false
	}
	mask := uint64(len(x.e) - 1)
	for i := x.home(hash); ; i = (i + 1) & mask {
		e := &x.e[i]
		if e.ref == 0 {
			return 0, false
		}
		if e.hash == hash {
			return e.ref - 1, true
		}
	}
}

// put sets the slot reference of hash.
func (x *index) put(hash uint64, ref int32) {
	if (x.n+1)*4 > len(x.e)*3 {
		x.grow()
	}
	mask := uint64(len(x.e) - 1)
	for i := x.home(hash); ; i = (i + 1) & mask {
		e := &x.e[i]
		if e.ref == 0 {
			*e = entry{hash: hash, ref: ref + 1}
			x.n++
			return
		}
		if e.hash == hash {
			e.ref = ref + 1
			return
		}
	}
}

// del removes hash, moving back the entries that probed past it so that
// no lookup stops early.
func (x *index) del(hash uint64) {
	if x.n == 0 {
		return
	}
	mask := uint64(len(x.e) - 1)
	i := x.home(hash)
	for ; ; i = (i + 1) & mask {
		if x.e[i].ref == 0 {
			return
		}
		if x.e[i].hash == hash {
			break
		}
	}
	x.n--
	for j := (i + 1) & mask; x.e[j].ref != 0; j = (j + 1) & mask {
		// Move e[j] into the hole at i unless its home lies cyclically
		// in (i, j], where it would no longer be found.
		h := x.home(x.e[j].hash)
		if (j-h)&mask >= (j-i)&mask {
			x.e[i] = x.e[j]
			i = j
		}
	}
	x.e[i] = entry{}
}

// grow doubles the table (or makes the first one) and reinserts.
func (x *index) grow() {
	old := x.e
	size := max(2*len(old), 16)
	x.e = make([]entry, size)
	x.shift = 64
	for s := size; s > 1; s >>= 1 {
		x.shift--
	}
	x.n = 0
	for _, e := range old {
		if e.ref != 0 {
			x.put(e.hash, e.ref-1)
		}
	}
}

// len returns the number of entries.
func (x *index) len() int { return x.n }
