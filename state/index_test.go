package state

import (
	"math/rand/v2"
	"testing"
)

// has reports whether the index reaches ref under tag by probing from its
// home cell, as lookups do.
func (x *index) has(tag uint32, ref int32) bool {
	t := x.tab.Load()
	if t == nil {
		return false
	}
	mask := uint64(len(t.cell) - 1)
	for i := t.home(tag); t.cell[i] != 0; i = (i + 1) & mask {
		if t.cell[i] == cellOf(tag, ref) {
			return true
		}
	}
	return false
}

// The index behaves like a set of (tag, ref) pairs under random puts and
// deletes, including tags that repeat or share a home cell and probes that
// wrap around the end of the table.
func TestIndex(t *testing.T) {
	cases := []struct {
		name  string
		space uint64 // hashes drawn from [0, space) times a stride
		ops   int
	}{
		{"sparse", 1 << 40, 20000},
		{"dense, many collisions", 300, 20000},
		{"tiny", 5, 2000},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			rng := rand.New(rand.NewPCG(c.space, 1))
			var x index
			ref := map[int32]uint32{} // ref → tag
			var live []int32
			next := int32(0)
			for op := range c.ops {
				h := rng.Uint64N(c.space) * 0x10000 // equal low bits, as in one partition
				if rng.IntN(3) < 2 || len(live) == 0 {
					r := next
					next++
					x.put(tagOf(h), r)
					ref[r] = tagOf(h)
					live = append(live, r)
				} else {
					j := rng.IntN(len(live))
					r := live[j]
					live[j] = live[len(live)-1]
					live = live[:len(live)-1]
					if !x.del(ref[r], r) {
						t.Fatalf("op %d: del(%#x, %d) found nothing", op, ref[r], r)
					}
					delete(ref, r)
					if x.has(tagOf(h), r) || x.del(tagOf(h), r) {
						t.Fatalf("op %d: deleted ref still there", op)
					}
				}
				if x.len() != len(ref) {
					t.Fatalf("op %d: len %d, want %d", op, x.len(), len(ref))
				}
				if op%97 == 0 {
					for r, tag := range ref {
						if !x.has(tag, r) {
							t.Fatalf("op %d: (%#x, %d) not found", op, tag, r)
						}
					}
				}
				if x.has(tagOf(h), next) {
					t.Fatalf("found a ref never put")
				}
			}
			for r, tag := range ref {
				x.del(tag, r)
			}
			if x.len() != 0 {
				t.Fatalf("len %d after deleting all", x.len())
			}
			for _, c := range x.tab.Load().cell {
				if c != 0 {
					t.Fatal("cell left in use")
				}
			}
		})
	}
}
