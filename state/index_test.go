package state

import (
	"math/rand/v2"
	"testing"
)

// The index behaves like a map under random puts and deletes, including
// hashes that share a home cell and wrap around the end of the table.
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
			ref := map[uint64]int32{}
			for op := range c.ops {
				h := rng.Uint64N(c.space) * 0x10000 // equal low bits, as in one partition
				switch rng.IntN(3) {
				case 0, 1:
					x.put(h, int32(op))
					ref[h] = int32(op)
				case 2:
					x.del(h)
					delete(ref, h)
				}
				if x.len() != len(ref) {
					t.Fatalf("op %d: len %d, want %d", op, x.len(), len(ref))
				}
				if op%97 == 0 {
					for k, v := range ref {
						if got, ok := x.get(k); !ok || got != v {
							t.Fatalf("op %d: get(%#x) = %d %v, want %d", op, k, got, ok, v)
						}
					}
				}
				if _, ok := x.get(h + 1); ok {
					t.Fatalf("found a hash never put")
				}
			}
			for k := range ref {
				x.del(k)
			}
			if x.len() != 0 {
				t.Fatalf("len %d after deleting all", x.len())
			}
			for _, e := range x.e {
				if e.ref != 0 {
					t.Fatal("cell left in use")
				}
			}
		})
	}
}
