package state

import (
	"fmt"
	"testing"
	"time"
	"unsafe"
)

func TestRecordLayout(t *testing.T) {
	if size := unsafe.Sizeof(hot{}); size != cacheLine {
		t.Errorf("hot record is %d bytes, want %d", size, cacheLine)
	}
	if size := unsafe.Sizeof(header{}); size > headerBytes {
		t.Errorf("block header takes %d bytes, more than %d", size, headerBytes)
	}
	if size := unsafe.Sizeof(line0{}); size != cacheLine {
		t.Errorf("a line of the finest ring is %d bytes", size)
	}
	s := newStore(t, Config{})
	if b := s.cfg.lay.blockBytes; b != 3456 {
		t.Errorf("default block is %d bytes, want 3456", b)
	}
}

// Every bucket of every level has its own mean and count bytes inside the
// block, clear of the header and of each other and aligned for their
// types, and a finest bucket's mean and count share a cache line.
func TestBlockLayout(t *testing.T) {
	layouts := [][]Level{
		DefaultLayout(),
		{{time.Minute, 1}},
		{{time.Second, 67}, {time.Minute, 600}},
		{{time.Minute, 121}, {time.Hour, 5}, {2 * time.Hour, 15}, {24 * time.Hour, 30}},
	}
	for _, levels := range layouts {
		s := newStore(t, Config{Layout: levels})
		lay := s.cfg.lay
		if lay.blockBytes%cacheLine != 0 {
			t.Errorf("%v: block of %d bytes is not whole lines", levels, lay.blockBytes)
		}
		blk := block(makeLines(lay.blockBytes))
		base := uintptr(unsafe.Pointer(&blk[0]))
		owner := make([]string, lay.blockBytes)
		claim := func(p unsafe.Pointer, n int, who string) int {
			from := int(uintptr(p) - base)
			if from%n != 0 {
				t.Fatalf("%v: %s at byte %d is not aligned", levels, who, from)
			}
			for i := from; i < from+n; i++ {
				if i < 0 || i >= len(owner) {
					t.Fatalf("%v: %s at byte %d outside the block of %d", levels, who, i, len(owner))
				}
				if owner[i] != "" {
					t.Fatalf("%v: %s overlaps %s at byte %d", levels, who, owner[i], i)
				}
				owner[i] = who
			}
			return from
		}
		hd := blk.header()
		claim(unsafe.Pointer(hd), int(unsafe.Sizeof(*hd)), "header")
		for l := range lay.n {
			r := blk.ring(lay, l)
			for i := range lay.count[l] {
				m, c := r.at(i)
				mo := claim(unsafe.Pointer(m), 4, fmt.Sprintf("mean %d/%d", l, i))
				co := claim(unsafe.Pointer(c), 2, fmt.Sprintf("count %d/%d", l, i))
				if l == 0 && mo/cacheLine != co/cacheLine {
					t.Fatalf("%v: finest bucket %d spans lines %d and %d", levels, i, mo/cacheLine, co/cacheLine)
				}
			}
		}
	}
}

// Hot records and blocks start on cache lines, for small chunks and large
// ones alike.
func TestChunkAlignment(t *testing.T) {
	s := newStore(t, Config{Partitions: 1})
	for i := range 3000 {
		mustAdd(t, s, testKey(fmt.Sprint(i)), t0, 1)
	}
	for _, c := range s.parts[0].chunks {
		if p := uintptr(unsafe.Pointer(&c.hot[0])); p%cacheLine != 0 {
			t.Errorf("chunk of %d series: hot records start at %#x", len(c.series), p)
		}
		if p := uintptr(unsafe.Pointer(&c.blocks[0])); p%cacheLine != 0 {
			t.Errorf("chunk of %d series: blocks start at %#x", len(c.series), p)
		}
	}
}
