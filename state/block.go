package state

import "unsafe"

// A block is the bucket memory of one series, in one run of cache lines
// so that a point closing a finest bucket writes two lines of one page or
// two: the header and one line of the finest ring.
//
//	header    one line: the open accumulators of the coarser levels
//	          and the number of points in closed finest buckets
//	level 0   lines of ten buckets each, ten float32 means then ten
//	          uint16 counts, so a closing bucket's mean and count share
//	          a line
//	level l≥1 count[l] float32 means, then count[l] uint16 counts
//
// padded to whole lines. Means are relative to the series base; a count of
// zero marks an empty bucket.
//
// The block is plain bytes, cache-line aligned, and read through typed
// views of its parts; the layout keeps each part aligned for its type, and
// none holds pointers, so the bytes can be seen as these types.
type block []byte

// header is the first line of a block.
type header struct {
	coarse [maxLevels - 1]acc // open accumulator of level l+1
	points uint64             // points in closed finest buckets
}

// line0 is one line of the finest ring.
type line0 struct {
	mean  [perLine0]float32
	count [perLine0]uint16
	_     [cacheLine - 6*perLine0]byte
}

const (
	headerBytes = cacheLine
	perLine0    = 10 // finest buckets per line: 10 × (4+2) bytes fit 64
)

// blockLayout places the levels of lay in a block and returns its size.
func blockLayout(lay *layout) int {
	off := headerBytes + lines0(lay)*cacheLine
	for l := 1; l < lay.n; l++ {
		off = (off + 3) &^ 3 // float32 alignment
		lay.meanAt[l] = off
		off += 4 * int(lay.count[l])
		lay.countAt[l] = off
		off += 2 * int(lay.count[l])
	}
	return (off + cacheLine - 1) / cacheLine * cacheLine
}

// lines0 is the number of lines of the finest ring.
func lines0(lay *layout) int {
	return (int(lay.count[0]) + perLine0 - 1) / perLine0
}

func (b block) header() *header {
	return (*header)(unsafe.Pointer(&b[0]))
}

// ring is one level of a block.
type ring struct {
	lines  []line0   // the finest level
	means  []float32 // the others
	counts []uint16
}

func (b block) ring(lay *layout, l int) ring {
	if l == 0 {
		return ring{lines: unsafe.Slice((*line0)(unsafe.Pointer(&b[headerBytes])), lines0(lay))}
	}
	n := int(lay.count[l])
	return ring{
		means:  unsafe.Slice((*float32)(unsafe.Pointer(&b[lay.meanAt[l]])), n),
		counts: unsafe.Slice((*uint16)(unsafe.Pointer(&b[lay.countAt[l]])), n),
	}
}

// at returns the mean and count of bucket i.
func (r *ring) at(i int64) (*float32, *uint16) {
	if r.lines != nil {
		ln := &r.lines[i/perLine0]
		return &ln.mean[i%perLine0], &ln.count[i%perLine0]
	}
	return &r.means[i], &r.counts[i]
}

// makeLines returns n zero bytes starting on a cache-line boundary. The
// runtime starts large allocations on a page and most small ones on a
// multiple of their size class, so the first try nearly always fits; only
// when it does not is the allocation made again with room to align, which
// would cost a page on a large one.
func makeLines(n int) []byte {
	if n <= 0 {
		return nil
	}
	if buf := make([]byte, n); uintptr(unsafe.Pointer(unsafe.SliceData(buf)))%cacheLine == 0 {
		return buf
	}
	buf := make([]byte, n+cacheLine-1)
	off := int(-uintptr(unsafe.Pointer(unsafe.SliceData(buf))) & (cacheLine - 1))
	return buf[off : off+n : off+n]
}
