package state

import (
	"fmt"
	"math/rand/v2"
	"testing"
)

// hashes computes FNV-1a exactly as Hash does and the check hash exactly as
// checkHash does, for every length around the word boundaries; MakeKey
// fills in both.
func TestHashes(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	for n := range 70 {
		b := make([]byte, n)
		for i := range b {
			b[i] = byte(rng.Uint32())
		}
		h, c := hashes(b)
		if h != Hash(b) || c != checkHash(b) {
			t.Fatalf("length %d: hashes %#x %#x, want %#x %#x", n, h, c, Hash(b), checkHash(b))
		}
	}
	k := MakeKey(nil, []byte("m"), []Label{{Name: []byte("a"), Value: []byte("1")}})
	if k.Check != checkHash(k.Text) || k.Hash != Hash(k.Text) || k.Check == 0 {
		t.Errorf("MakeKey: hash %#x check %#x", k.Hash, k.Check)
	}
}

// The check hash tells apart what a mere word hash might not: texts that
// differ only by trailing zero bytes, or in one byte anywhere, and a large
// set of keys that differ in a few characters.
func TestCheckHashDistinct(t *testing.T) {
	seen := map[uint64]string{}
	add := func(s string) {
		c := checkHash([]byte(s))
		if prev, ok := seen[c]; ok && prev != s {
			t.Fatalf("check hash %#x shared by %q and %q", c, prev, s)
		}
		seen[c] = s
	}
	for i := range 16 {
		add(string(make([]byte, i))) // "", "\x00", "\x00\x00", ...
	}
	for i := range 200_000 {
		add(fmt.Sprintf(`node_cpu_seconds_total{cpu="%d",host="node-%05d.dc1",mode="idle"}`, i%8, i/8))
	}
	// Same length, one byte changed: the per-word step is a bijection, so
	// the check hashes must differ.
	rng := rand.New(rand.NewPCG(3, 4))
	for range 10_000 {
		b := make([]byte, 1+rng.IntN(60))
		for i := range b {
			b[i] = byte(rng.Uint32())
		}
		c := checkHash(b)
		i := rng.IntN(len(b))
		b[i] ^= byte(1 + rng.IntN(255))
		if checkHash(b) == c {
			t.Fatalf("check hash unchanged by one byte of %q", b)
		}
	}
}
