package state

import (
	"bytes"
	"errors"
	"fmt"
	"testing"
	"time"
)

// fuzzConfigs are the stores FuzzRestore restores into: one level with
// two open slots, and two levels with four, both small so that a record
// is a few hundred bytes.
func fuzzConfigs() []Config {
	return []Config{
		{Layout: []Level{{time.Minute, 10}}, Partitions: 2, ChunkSize: 4, MaxSeries: 64, IdleExpiry: time.Hour},
		{Layout: []Level{{time.Minute, 10}, {5 * time.Minute, 4}}, Lateness: 2 * time.Minute, Partitions: 3, ChunkSize: 4, MaxSeries: 64, IdleExpiry: time.Hour},
	}
}

// fuzzSeeds returns small valid snapshots of each fuzz configuration.
func fuzzSeeds(t testing.TB) [][]byte {
	var seeds [][]byte
	for ci, cfg := range fuzzConfigs() {
		for n := range 3 {
			s := newStore(t, cfg)
			for i := range n + 1 {
				k := testKey(fmt.Sprint("f", i))
				for j := range 1 + 7*i*n {
					mustAdd(t, s, k, t0+int64(j)*70*sec, float64(j*ci))
				}
				if i == 1 {
					s.Do(k, func(se *Series) {
						se.Memo().RulesSet = true
						in := se.Incident(5, true)
						in.Phase, in.ID = Closing, [16]byte{1, 2, 3}
					})
				}
			}
			seeds = append(seeds, snapshot(t, s, []byte(fmt.Sprint("seq ", n))))
		}
	}
	return seeds
}

// Restore either refuses its input with one of its errors or returns a
// store that works: every series can be viewed and fed, and the store
// snapshots and restores again. Each input is also tried with its CRCs
// recomputed, so that the fuzzer gets past them to the record checks.
func FuzzRestore(f *testing.F) {
	for _, seed := range fuzzSeeds(f) {
		f.Add(seed)
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		for _, cfg := range fuzzConfigs() {
			restoreWorks(t, cfg, data)
			restoreWorks(t, cfg, reseal(data))
		}
	})
}

func restoreWorks(t *testing.T, cfg Config, data []byte) {
	s, meta, err := Restore(cfg, bytes.NewReader(data))
	if err != nil {
		if !errors.Is(err, ErrSnapshot) && !errors.Is(err, ErrSnapshotLayout) && !errors.Is(err, ErrSeriesCap) {
			t.Fatalf("unexpected error: %v", err)
		}
		if s != nil || meta != nil {
			t.Fatal("a refused snapshot returned a store or meta")
		}
		return
	}
	var v View
	var keys []Key
	for p := range s.Partitions() {
		s.Range(p, func(se *Series) bool {
			se.View(&v, 0)
			se.View(&v, time.Hour)
			_ = se.Points() + uint64(se.Closed()) + uint64(se.Newest()) + uint64(len(se.Incidents()))
			keys = append(keys, testKey(se.Key()))
			return true
		})
	}
	if len(keys) != s.Len() {
		t.Fatalf("ranged %d series, Len %d", len(keys), s.Len())
	}
	var b1 bytes.Buffer
	if err := s.WriteSnapshot(&b1, meta); err != nil {
		t.Fatalf("snapshot of a restored store: %v", err)
	}
	s2, meta2, err := Restore(cfg, bytes.NewReader(b1.Bytes()))
	if err != nil || !bytes.Equal(meta, meta2) || s2.Len() != s.Len() {
		t.Fatalf("restoring the snapshot of a restored store: %v", err)
	}
	// Written once by WriteSnapshot, the snapshot is in its canonical
	// order; another round must reproduce it byte for byte.
	var b2 bytes.Buffer
	if err := s2.WriteSnapshot(&b2, meta2); err != nil || !bytes.Equal(b1.Bytes(), b2.Bytes()) {
		t.Fatalf("second round differs (%v): %d and %d bytes", err, b1.Len(), b2.Len())
	}
	for _, k := range keys {
		var clock int64
		s.Do(k, func(se *Series) { clock = se.Newest() })
		for _, ts := range []int64{clock, clock + 1, clock + 61*sec, clock + 3*hour, clock - 3*minute} {
			s.Add(k, ts, 1, func(se *Series) { se.View(&v, 0) }) // any refusal is fine: no panic
		}
	}
	s.Expire(1 << 62)
}
