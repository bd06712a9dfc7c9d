package state

import (
	"fmt"
	"testing"
	"unsafe"
)

// hotEnd is where the fields a point that closes nothing touches end.
const hotEnd = 120

func TestSeriesLayout(t *testing.T) {
	var s Series
	if end := unsafe.Offsetof(s.closedAny) + unsafe.Sizeof(s.closedAny); end > hotEnd {
		t.Errorf("hot fields end at %d, want at most %d", end, hotEnd)
	}
	if off := unsafe.Offsetof(s.hash); off < hotEnd {
		t.Errorf("cold fields start at %d, before %d", off, hotEnd)
	}
	if size := unsafe.Sizeof(s); size != 256 {
		t.Errorf("Series is %d bytes, want 256", size)
	}
}

// Every header's hot fields lie within one aligned 128-byte pair of cache
// lines, for small chunks (which the runtime starts 8 bytes into a block)
// and large ones alike.
func TestChunkAlignment(t *testing.T) {
	s := newStore(t, Config{Partitions: 1})
	for i := range 3000 {
		mustAdd(t, s, testKey(fmt.Sprint(i)), t0, 1)
	}
	for _, c := range s.parts[0].chunks {
		if p := uintptr(unsafe.Pointer(&c.series[0])); p%128+hotEnd > 128 {
			t.Errorf("chunk of %d series starts at %#x: hot fields straddle a pair", len(c.series), p)
		}
	}
}
