package state

import "unsafe"

// hot is what every point of a series reads or writes, packed into one
// cache line: with 100,000 series the hot records take 6.4 MB, against
// 25.6 MB for records that mixed hot and cold fields, so far more of them
// stay in cache and each point that misses fetches one line. What a point
// closing buckets needs is in the series' block (block.go), the rest in
// its Series record, read by views and the pipeline.
//
// Counts of the open buckets are 32-bit to make room for first, which
// spares the common point every division: its bucket follows from
// comparisons with first's edges.
type hot struct {
	hash  uint64     // FNV-1a of the key
	check uint64     // check hash of the key: (hash, check) is the identity
	clock int64      // newest timestamp seen, unix ms
	first int64      // number of the oldest open finest bucket: floorDiv(clock-lateness, width)
	base  float64    // first value; sums are kept relative to it
	sum   [2]float64 // open finest buckets, slot = number mod 2 (more in chunk.extra)
	n     [2]uint32
}

// cacheLine is the line size the hot records are aligned to.
const cacheLine = 64

// makeHot returns n zero hot records starting on a cache-line boundary, so
// that each record is exactly one line. The records hold no pointers, so
// they can live in a byte allocation aligned by hand.
func makeHot(n int) []hot {
	if n <= 0 {
		return nil
	}
	buf := makeLines(n * int(unsafe.Sizeof(hot{})))
	return unsafe.Slice((*hot)(unsafe.Pointer(unsafe.SliceData(buf))), n)
}

// extraSlot is open finest bucket 2 or 3 of a series whose lateness needs
// four.
type extraSlot struct {
	sum float64
	n   uint32
}
