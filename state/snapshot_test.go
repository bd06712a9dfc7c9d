package state

import (
	"bytes"
	"encoding/binary"
	"errors"
	"fmt"
	"hash/crc32"
	"hash/fnv"
	"io"
	"math"
	"math/rand/v2"
	"slices"
	"strings"
	"sync"
	"testing"
	"time"
	"unsafe"
)

// Two key texts whose 64-bit FNV-1a hashes are equal, found for these
// tests by a parallel collision search (distinguished points) over texts
// of this form. Series with them share a hash, so the second one created
// lives in its partition's spill map.
const (
	collideA = `spill{id="2d3b9f1b39c94eeb"}`
	collideB = `spill{id="23fdf6e61247c754"}`
)

func TestCollidingKeys(t *testing.T) {
	// hash/fnv New64a computes the same FNV-1a as Hash.
	a, b := fnv.New64a(), fnv.New64a()
	a.Write([]byte(collideA))
	b.Write([]byte(collideB))
	if a.Sum64() != b.Sum64() || Hash([]byte(collideA)) != a.Sum64() {
		t.Fatalf("hashes %#x %#x, Hash %#x", a.Sum64(), b.Sum64(), Hash([]byte(collideA)))
	}
	if checkHash([]byte(collideA)) == checkHash([]byte(collideB)) {
		t.Fatal("the check hashes collide too")
	}
}

// snapConfigs are the stores the snapshot tests run on: the default
// layout, lateness above one width (four open slots) and two levels over
// a partition count that is not a power of two.
var snapConfigs = []struct {
	name  string
	cfg   Config
	slots int
}{
	{"default", Config{Partitions: 8, ChunkSize: 64}, 2},
	{"four slots", Config{Lateness: 150 * time.Second, Partitions: 8, ChunkSize: 64}, 4},
	{"two levels", Config{Layout: []Level{{time.Minute, 20}, {5 * time.Minute, 12}}, Lateness: 30 * time.Second, Partitions: 5, ChunkSize: 16, MaxSeries: 10_000}, 2},
}

// nanPayload32 is a quiet NaN with a payload, which must survive bit for
// bit.
var nanPayload32 = math.Float32frombits(0x7fc0_1234)

// fillScenario feeds s with series of every kind a snapshot must carry and
// sets memos and incidents on some. It returns the keys of the live series.
func fillScenario(t testing.TB, s *Store, seed uint64) []Key {
	t.Helper()
	rng := rand.New(rand.NewPCG(seed, 7))
	lay := s.cfg.lay
	add := func(k Key, ts int64, v float64) {
		// Late points are part of the mix; anything else is a bug.
		if err := s.Add(k, ts, v, nil); err != nil && !errors.Is(err, ErrLate) {
			t.Fatalf("Add(%s, %d, %v): %v", k.Text, ts, v, err)
		}
	}
	var keys []Key
	for i := range 160 {
		k := testKey(fmt.Sprintf(`snap_%d{kind="%d"}`, i, i%5))
		keys = append(keys, k)
		start := t0 - 3*hour + rng.Int64N(hour)
		if i%11 == 0 {
			start = -5*hour - rng.Int64N(hour) // before 1970: negative bucket numbers
		}
		ts, v := start, 100*rng.NormFloat64()
		switch i % 5 {
		case 0: // brand new: one point, no bucket closed
			add(k, ts, v)
		case 1: // a few minutes of irregular points, some late
			for range 5 + rng.IntN(40) {
				ts += rng.Int64N(40 * sec)
				add(k, ts-rng.Int64N(lay.late+lay.width[0]), v+rng.NormFloat64())
			}
		case 2: // a day and a half: every level closes buckets
			for range 200 + rng.IntN(200) {
				ts += rng.Int64N(10 * minute)
				add(k, ts, v+float64(ts-start)/float64(hour))
			}
		case 3: // three weeks with gaps: every ring wraps and skips
			for range 300 + rng.IntN(300) {
				ts += rng.Int64N(90 * minute)
				if rng.IntN(50) == 0 {
					ts += 3 * 24 * hour
				}
				add(k, ts, v+rng.NormFloat64())
			}
		case 4: // large and tiny values, dense points in few buckets
			for range 30 {
				ts += rng.Int64N(5 * sec)
				add(k, ts, 1e300*rng.NormFloat64())
			}
			add(k, ts+3*minute, -0.0)
		}
	}
	// Deleted series leave free slots, which the next new series take.
	for i := 3; i < len(keys); i += 7 {
		if !s.Delete(keys[i]) {
			t.Fatalf("delete %s", keys[i].Text)
		}
	}
	live := keys[:0]
	for i, k := range keys {
		if i < 3 || (i-3)%7 != 0 {
			live = append(live, k)
		}
	}
	for i := range 10 {
		k := testKey(fmt.Sprintf(`snap_re_%d`, i))
		live = append(live, k)
		for j := range 3 + i*20 {
			add(k, t0+int64(j)*47*sec, float64(j))
		}
	}
	// A pair of keys with one FNV-1a hash: the second goes to the spill map.
	for _, text := range []string{collideA, collideB} {
		k := testKey(text)
		live = append(live, k)
		for j := range 100 {
			add(k, t0+int64(j)*83*sec, float64(j%7))
		}
	}

	// Memos and incidents: several rules, every phase, ids, odd floats.
	for i, k := range live {
		if i%3 != 0 {
			continue
		}
		s.Do(k, func(se *Series) {
			m := se.Memo()
			m.Evaluated, m.Rules, m.RulesSet = t0+int64(i), uint64(i)*0x9e3779b97f4a7c15, i%2 == 0
			m.Published = Published{At: t0 - int64(i), Mean: float32(i), Upper: nanPayload32, Lower: float32(math.Copysign(0, -1))}
			m.Cycle = CycleMemo{At: t0 + hour, Period: 86400, Period2: int32(-i), ACF: 0.625}
			m.Calib = Calibration{Scale: [6]float32{1, 0, nanPayload32, float32(math.Inf(-1)), 1e-40, 3}, Due: [2]int64{t0, -1}, Mean: [2]float32{2, 3}, SD: [2]float32{0.5, 0}, Seen: uint32(i)}
			for r := range i % 6 {
				in := se.Incident(uint16(63-r*5), true)
				in.Phase = Phase(r % 4)
				in.ID = [16]byte{byte(i), byte(r), 0xff, 15: 0x42}
				in.Since, in.Emitted, in.Prob, in.ETA = t0+int64(r), -int64(r), float32(r)/7, math.MaxInt64
				in.Opened, in.Threshed = math.MinInt64, t0
			}
			if i%4 == 0 {
				se.Incident(9, true)
				se.DropIncident(9) // leaves an empty, non-nil slice when it was the only one
			}
		})
	}
	return live
}

// seriesState is everything a series holds, as seen through its methods
// and, raw, in its records.
type seriesState struct {
	view           View
	points         uint64
	newest, closed int64
	born           int64
	memo           []uint64
	incidents      []Incident
	prob           []uint32 // incidents' Prob bits
	hot, block     []byte
	extra          []uint64
}

func stateOf(se *Series) seriesState {
	st := seriesState{points: se.Points(), newest: se.Newest(), closed: se.Closed(), born: se.born}
	se.View(&st.view, 0)
	st.memo = memoBits(se.Memo())
	st.incidents = slices.Clone(se.Incidents())
	for _, in := range st.incidents {
		st.prob = append(st.prob, math.Float32bits(in.Prob))
	}
	st.hot = slices.Clone(unsafe.Slice((*byte)(unsafe.Pointer(se.hot())), unsafe.Sizeof(hot{})))
	st.block = slices.Clone(se.ch.block(int(se.row)))
	for _, x := range se.ch.extraOf(int(se.row)) {
		st.extra = append(st.extra, math.Float64bits(x.sum), uint64(x.n))
	}
	return st
}

// memoBits lists every field of m, floats by their bits.
func memoBits(m *Memo) []uint64 {
	f := func(x float32) uint64 { return uint64(math.Float32bits(x)) }
	b := []uint64{uint64(m.Evaluated), m.Rules, uint64(boolByte(m.RulesSet)),
		uint64(m.Published.At), f(m.Published.Mean), f(m.Published.Upper), f(m.Published.Lower),
		uint64(m.Cycle.At), uint64(m.Cycle.Period), uint64(m.Cycle.Period2), f(m.Cycle.ACF)}
	for _, x := range m.Calib.Scale {
		b = append(b, f(x))
	}
	b = append(b, uint64(m.Calib.Due[0]), uint64(m.Calib.Due[1]), f(m.Calib.Mean[0]), f(m.Calib.Mean[1]),
		f(m.Calib.SD[0]), f(m.Calib.SD[1]), uint64(m.Calib.Seen))
	return b
}

// statesOf returns the state of every live series of s by key.
func statesOf(s *Store) map[string]seriesState {
	m := make(map[string]seriesState)
	for p := range s.Partitions() {
		s.Range(p, func(se *Series) bool {
			m[se.Key()] = stateOf(se)
			return true
		})
	}
	return m
}

// compareStores reports every series whose state differs between a and b.
func compareStores(t *testing.T, a, b *Store) {
	t.Helper()
	if a.Len() != b.Len() {
		t.Errorf("Len %d, %d", a.Len(), b.Len())
	}
	sa, sb := statesOf(a), statesOf(b)
	if len(sa) != len(sb) || len(sa) != a.Len() {
		t.Errorf("%d and %d series ranged, Len %d", len(sa), len(sb), a.Len())
	}
	bad := 0
	for key, x := range sa {
		y, ok := sb[key]
		switch {
		case !ok:
			t.Errorf("%s missing", key)
		case !sameView(&x.view, &y.view):
			t.Errorf("%s: views differ", key)
		case x.points != y.points || x.newest != y.newest || x.closed != y.closed || x.born != y.born:
			t.Errorf("%s: points %d/%d newest %d/%d closed %d/%d born %d/%d", key, x.points, y.points, x.newest, y.newest, x.closed, y.closed, x.born, y.born)
		case !slices.Equal(x.memo, y.memo):
			t.Errorf("%s: memo %x, %x", key, x.memo, y.memo)
		case len(x.incidents) != len(y.incidents) || !slices.Equal(x.prob, y.prob) || !sameIncidents(x.incidents, y.incidents):
			t.Errorf("%s: incidents %+v, %+v", key, x.incidents, y.incidents)
		case !bytes.Equal(x.hot, y.hot) || !bytes.Equal(x.block, y.block) || !slices.Equal(x.extra, y.extra):
			t.Errorf("%s: raw records differ", key)
		default:
			continue
		}
		if bad++; bad > 10 {
			t.Fatal("too many differences")
		}
	}
}

// sameIncidents compares incidents field by field, Prob by the caller.
func sameIncidents(a, b []Incident) bool {
	for i := range a {
		x, y := a[i], b[i]
		x.Prob, y.Prob = 0, 0
		if x != y {
			return false
		}
	}
	return true
}

func snapshot(t testing.TB, s *Store, meta []byte) []byte {
	t.Helper()
	var b bytes.Buffer
	if err := s.WriteSnapshot(&b, meta); err != nil {
		t.Fatal(err)
	}
	return b.Bytes()
}

func restore(t testing.TB, cfg Config, b []byte) (*Store, []byte) {
	t.Helper()
	s, meta, err := Restore(cfg, bytes.NewReader(b))
	if err != nil {
		t.Fatal(err)
	}
	return s, meta
}

// spilled counts the series kept in spill maps.
func spilled(s *Store) int {
	n := 0
	for i := range s.parts {
		n += len(s.parts[i].spill)
	}
	return n
}

// futurePoints returns, for each key, points that follow the series' state
// in s: in the open buckets, late inside the lateness window, late beyond
// it (ErrLate), and ones that close buckets on every level, with gaps that
// wrap every ring.
func futurePoints(t *testing.T, s *Store, keys []Key, seed uint64) []Entry {
	rng := rand.New(rand.NewPCG(seed, 9))
	lay := s.cfg.lay
	w0 := lay.width[0]
	per := make([][]Entry, len(keys))
	for i, k := range keys {
		var clock int64
		s.Do(k, func(se *Series) { clock = se.Newest() })
		first := floorDiv(clock-lay.late, w0)
		es := []Entry{
			{Key: k, TS: clock, Value: 1},
			{Key: k, TS: clock - lay.late/2, Value: 2}, // late, still open
			{Key: k, TS: first*w0 - 1, Value: 3},       // ErrLate
		}
		ts := clock
		for range 20 + rng.IntN(30) {
			ts += rng.Int64N(3 * w0)
			es = append(es, Entry{Key: k, TS: ts, Value: rng.NormFloat64()}, Entry{Key: k, TS: ts - rng.Int64N(lay.late+w0), Value: 4})
		}
		top := lay.width[lay.n-1] * lay.count[lay.n-1]
		for _, gap := range []int64{lay.width[lay.n-1] + 1, 2 * lay.width[lay.n-1], top / 3, top + 1} {
			ts += gap
			es = append(es, Entry{Key: k, TS: ts, Value: 5}, Entry{Key: k, TS: ts + 1, Value: 6})
		}
		per[i] = es
	}
	// Series on their own clocks, interleaved.
	var es []Entry
	for more := true; more; {
		more = false
		for i := range per {
			if len(per[i]) > 0 {
				es = append(es, per[i][0])
				per[i], more = per[i][1:], true
			}
		}
	}
	return es
}

// feedBoth applies es to a and b, first with Add, then again shifted with
// AddBatch, and checks that every error and onClose call is the same.
func feedBoth(t *testing.T, a, b *Store, es []Entry) {
	t.Helper()
	var ca, cb []string
	onA := func(se *Series) { ca = append(ca, se.Key()) }
	onB := func(se *Series) { cb = append(cb, se.Key()) }
	errText := func(err error) string {
		if err == nil {
			return ""
		}
		return err.Error()
	}
	late := 0
	for _, e := range es {
		ea, eb := a.Add(e.Key, e.TS, e.Value, onA), b.Add(e.Key, e.TS, e.Value, onB)
		if errText(ea) != errText(eb) {
			t.Fatalf("Add(%s, %d): %v, restored %v", e.Key.Text, e.TS, ea, eb)
		}
		if errors.Is(ea, ErrLate) {
			late++
		}
	}
	if late == 0 || len(ca) == 0 {
		t.Errorf("%d late points and %d closes: the future points miss cases", late, len(ca))
	}
	batch := func(s *Store, on func(*Series)) []Entry {
		bs := slices.Clone(es)
		for i := range bs {
			bs[i].TS += 40 * 24 * hour
		}
		s.AddBatch(bs, on)
		return bs
	}
	ba, bb := batch(a, onA), batch(b, onB)
	for i := range ba {
		if errText(ba[i].Err) != errText(bb[i].Err) {
			t.Fatalf("AddBatch entry %d: %v, restored %v", i, ba[i].Err, bb[i].Err)
		}
	}
	if !slices.Equal(ca, cb) {
		t.Errorf("onClose calls differ: %d and %d", len(ca), len(cb))
	}
}

// A restored store holds exactly what the snapshot's store held, into any
// partition count and chunk size, and then goes on exactly as it would.
func TestSnapshotRoundTrip(t *testing.T) {
	for ci, tc := range snapConfigs {
		t.Run(tc.name, func(t *testing.T) {
			orig := newStore(t, tc.cfg)
			if orig.cfg.lay.slots != tc.slots {
				t.Fatalf("layout has %d open slots, want %d", orig.cfg.lay.slots, tc.slots)
			}
			keys := fillScenario(t, orig, uint64(ci))
			if orig.Len() != len(keys) || spilled(orig) != 1 {
				t.Fatalf("Len %d for %d keys, %d spilled", orig.Len(), len(keys), spilled(orig))
			}
			// The scenario has series with no bucket closed and series
			// with closed buckets on every level.
			fresh, full := 0, 0
			for _, st := range statesOf(orig) {
				if st.closed == 0 {
					fresh++
				}
				every := true
				for _, lv := range st.view.Levels {
					every = every && slices.ContainsFunc(lv.Y, func(y float64) bool { return !math.IsNaN(y) })
				}
				if every {
					full++
				}
			}
			if fresh == 0 || full == 0 {
				t.Fatalf("%d series without a closed bucket, %d with closed buckets on every level", fresh, full)
			}
			meta := []byte("stream seq 12345")
			snap := snapshot(t, orig, meta)
			restores := []struct {
				name               string
				partitions, chunks int
			}{
				{"same", tc.cfg.Partitions, tc.cfg.ChunkSize},
				{"3 partitions, chunks of 7", 3, 7},
				{"1 partition", 1, 0},
				{"64 partitions", 64, 0},
			}
			for _, r := range restores {
				t.Run(r.name, func(t *testing.T) {
					cfg := tc.cfg
					cfg.Partitions, cfg.ChunkSize, cfg.MaxSeries = r.partitions, r.chunks, 10_000
					// Each run feeds the original, so rebuild it.
					a := newStore(t, tc.cfg)
					fillScenario(t, a, uint64(ci))
					b, gotMeta := restore(t, cfg, snap)
					if !bytes.Equal(gotMeta, meta) {
						t.Errorf("meta %q, want %q", gotMeta, meta)
					}
					if spilled(b) != 1 {
						t.Errorf("%d series spilled, want 1", spilled(b))
					}
					compareStores(t, a, b)
					feedBoth(t, a, b, futurePoints(t, a, keys, uint64(ci)))
					compareStores(t, a, b)
					// New series after the restore reuse nothing and collide with nothing.
					for i := range 20 {
						k := testKey(fmt.Sprint("after_", i))
						mustAdd(t, a, k, t0, 1)
						mustAdd(t, b, k, t0, 1)
					}
					compareStores(t, a, b)
				})
			}
		})
	}
}

// The snapshot of a restored store is byte for byte the original snapshot
// when the partition count and idle expiry setting are the same: a
// snapshot lists each partition's live series in slot order, and Restore
// fills slots in the order it reads, so the order survives deletions and
// any chunk size. Another partition count reorders the records; then the
// two snapshots are equal once decoded, which the round trip test checks.
func TestSnapshotIdempotent(t *testing.T) {
	for ci, tc := range snapConfigs {
		t.Run(tc.name, func(t *testing.T) {
			orig := newStore(t, tc.cfg)
			fillScenario(t, orig, uint64(ci))
			snap := snapshot(t, orig, []byte{1, 2, 3})
			cfg := tc.cfg
			cfg.ChunkSize, cfg.MaxSeries = 5, 10_000
			b, _ := restore(t, cfg, snap)
			if again := snapshot(t, b, []byte{1, 2, 3}); !bytes.Equal(again, snap) {
				t.Errorf("snapshot of the restored store differs: %d bytes, %d before", len(again), len(snap))
			}
		})
	}
}

func TestSnapshotEmpty(t *testing.T) {
	for _, cfg := range []Config{{}, {IdleExpiry: time.Hour}} {
		s := newStore(t, cfg)
		snap := snapshot(t, s, nil)
		r, meta := restore(t, cfg, snap)
		if r.Len() != 0 || len(meta) != 0 || r.newest() != math.MinInt64 {
			t.Errorf("%+v: Len %d, meta %q, newest %d", cfg, r.Len(), meta, r.newest())
		}
		if n := expireAll(r, math.MaxInt64); n != 0 {
			t.Errorf("expired %d", n)
		}
		mustAdd(t, r, testKey("x"), t0, 1)
	}
}

// Meta travels as given, up to 1 MiB.
func TestSnapshotMeta(t *testing.T) {
	s := newStore(t, Config{Layout: smallLayout, Partitions: 2})
	mustAdd(t, s, testKey("a"), t0, 1)
	big := bytes.Repeat([]byte{0, 0xff, 'x'}, maxSnapMeta/3+1)[:maxSnapMeta]
	for _, meta := range [][]byte{nil, {}, {0}, []byte(`{"seq":42}`), big} {
		_, got := restore(t, Config{Layout: smallLayout}, snapshot(t, s, meta))
		if !bytes.Equal(got, meta) {
			t.Errorf("meta of %d bytes came back as %d bytes", len(meta), len(got))
		}
	}
	if err := s.WriteSnapshot(io.Discard, append(big, 0)); err == nil {
		t.Error("meta over 1 MiB accepted")
	}
}

// WriteSnapshot refuses what Restore would refuse rather than write a
// snapshot that cannot be read back.
func TestSnapshotUnwritable(t *testing.T) {
	cases := []struct {
		name string
		set  func(*Series)
	}{
		{"rule 64", func(se *Series) { se.Incident(64, true) }},
		{"phase 4", func(se *Series) { se.Incident(1, true).Phase = Closing + 1 }},
		{"two incidents of one rule", func(se *Series) {
			se.Incident(1, true)
			se.Incident(2, true)
			se.Incidents()[1].Rule = 1
		}},
	}
	for _, tc := range cases {
		s := newStore(t, Config{Layout: smallLayout, Partitions: 2})
		k := testKey("a")
		mustAdd(t, s, k, t0, 1)
		s.Do(k, tc.set)
		if err := s.WriteSnapshot(io.Discard, nil); err == nil {
			t.Errorf("%s: written", tc.name)
		}
	}
	s := newStore(t, Config{Layout: smallLayout, Partitions: 2})
	mustAdd(t, s, Key{Hash: 42, Text: []byte("not hashed")}, t0, 1)
	if err := s.WriteSnapshot(io.Discard, nil); err == nil {
		t.Error("key with another hash written")
	}
	s = newStore(t, Config{Layout: smallLayout, Partitions: 2})
	mustAdd(t, s, testKey(strings.Repeat("k", maxSnapKey+1)), t0, 1)
	if err := s.WriteSnapshot(io.Discard, nil); err == nil {
		t.Error("key over 1 MiB written")
	}
	s = newStore(t, Config{Layout: smallLayout, Partitions: 2})
	k := testKey(strings.Repeat("k", maxSnapKey))
	mustAdd(t, s, k, t0, 1)
	r, _ := restore(t, Config{Layout: smallLayout}, snapshot(t, s, nil))
	if !r.Do(k, func(*Series) {}) {
		t.Error("1 MiB key lost")
	}
}

// smallSnapshot is a snapshot of a few series in the small layout with
// four open slots, incidents and a memo: every kind of field, in little
// space.
func smallSnapshot(t testing.TB) ([]byte, Config) {
	cfg := Config{Layout: []Level{{time.Minute, 10}, {5 * time.Minute, 4}}, Lateness: 2 * time.Minute, Partitions: 2, ChunkSize: 4, MaxSeries: 1000}
	s := newStore(t, cfg)
	for i := range 3 {
		k := testKey(fmt.Sprint("m{i=", i, "}"))
		for j := range 6 * i {
			mustAdd(t, s, k, t0+int64(j)*50*sec, float64(i+j))
		}
		mustAdd(t, s, k, t0+int64(6*i)*50*sec, -1)
		s.Do(k, func(se *Series) {
			se.Memo().Evaluated = t0
			se.Memo().RulesSet = true
			se.Incident(uint16(i), true).Phase = Open
		})
	}
	return snapshot(t, s, []byte("m")), cfg
}

// snapRecord locates record i of snap, a snapshot in layout lay: its
// offset (at its tag) and length.
func snapRecord(snap []byte, lay *layout, i int) (at, size int) {
	at = snapHeaderBytes + int(binary.LittleEndian.Uint32(snap[snapHeaderBytes-4:])) + 4
	for {
		keyLen := int(binary.LittleEndian.Uint32(snap[at+1:]))
		nInc := int(snap[at+5])
		size = 1 + recFixedBytes + (lay.slots-2)*extraBytes + keyLen + nInc*incidentBytes + lay.blockBytes
		if i == 0 {
			return at, size
		}
		at += size
		i--
	}
}

// reseal recomputes the header CRC, when the header is all there, and
// the trailer CRC of an edited snapshot, as a forger would. Input too
// short for a trailer comes back as it is.
func reseal(snap []byte) []byte {
	snap = slices.Clone(snap)
	tab := crc32.MakeTable(crc32.Castagnoli)
	if len(snap) >= snapHeaderBytes {
		h := uint64(snapHeaderBytes) + uint64(binary.LittleEndian.Uint32(snap[snapHeaderBytes-4:]))
		if h+4 <= uint64(len(snap)) {
			binary.LittleEndian.PutUint32(snap[h:], crc32.Checksum(snap[:h], tab))
		}
	}
	if n := len(snap) - 4; n >= 0 {
		binary.LittleEndian.PutUint32(snap[n:], crc32.Checksum(snap[:n], tab))
	}
	return snap
}

func TestSnapshotRefusals(t *testing.T) {
	snap, cfg := smallSnapshot(t)
	lay := newStore(t, cfg).cfg.lay
	if _, _, err := Restore(cfg, bytes.NewReader(reseal(snap))); err != nil {
		t.Fatalf("resealing an intact snapshot broke it: %v", err)
	}
	rec0, size0 := snapRecord(snap, lay, 0)
	rec1, _ := snapRecord(snap, lay, 1)
	fix := rec0 + 1           // fixed part of record 0
	hotAt := fix + 5          // its hot record
	bornAt := hotAt + 64 + 24 // after the two extra slots
	rulesSetAt := bornAt + 8 + 16
	keyAt := fix + recFixedBytes + 2*extraBytes
	keyLen := int(binary.LittleEndian.Uint32(snap[fix:]))
	incAt := keyAt + keyLen
	trailer := len(snap) - trailerBytes
	put64 := func(at int, v uint64) func([]byte) []byte {
		return func(b []byte) []byte { binary.LittleEndian.PutUint64(b[at:], v); return b }
	}
	get64 := func(at int) uint64 { return binary.LittleEndian.Uint64(snap[at:]) }

	otherLayout := cfg
	otherLayout.Layout = []Level{{time.Minute, 11}, {5 * time.Minute, 4}}
	otherLate := cfg
	otherLate.Lateness = time.Minute
	oneLevel := cfg
	oneLevel.Layout = cfg.Layout[:1]
	capped := cfg
	capped.MaxSeries = 2
	if _, _, err := Restore(Config{MaxSeries: -1}, bytes.NewReader(snap)); err == nil || errors.Is(err, ErrSnapshot) {
		t.Errorf("invalid config: %v", err)
	}

	cases := []struct {
		name string
		cfg  Config
		edit func([]byte) []byte // on a copy; the CRCs are recomputed after
		want error
	}{
		{"other layout", otherLayout, nil, ErrSnapshotLayout},
		{"other lateness", otherLate, nil, ErrSnapshotLayout},
		{"fewer levels", oneLevel, nil, ErrSnapshotLayout},
		{"too many series", capped, nil, ErrSeriesCap},
		{"magic", cfg, func(b []byte) []byte { b[0] = 'h'; return b }, ErrSnapshot},
		{"version", cfg, func(b []byte) []byte { b[8] = 2; return b }, ErrSnapshot},
		{"no levels", cfg, func(b []byte) []byte { b[12] = 0; return b }, ErrSnapshot},
		{"five levels", cfg, func(b []byte) []byte { b[12] = 5; return b }, ErrSnapshot},
		{"unused level set", cfg, put64(16+3*16, 1), ErrSnapshot},
		{"meta too long", cfg, func(b []byte) []byte { binary.LittleEndian.PutUint32(b[snapHeaderBytes-4:], maxSnapMeta+1); return b }, ErrSnapshot},
		{"record tag", cfg, func(b []byte) []byte { b[rec0] = 2; return b }, ErrSnapshot},
		{"end tag early", cfg, func(b []byte) []byte { b[rec1] = tagEnd; return b }, ErrSnapshot},
		{"key too long", cfg, func(b []byte) []byte { binary.LittleEndian.PutUint32(b[fix:], maxSnapKey+1); return b }, ErrSnapshot},
		{"65 incidents", cfg, func(b []byte) []byte { b[fix+4] = 65; return b }, ErrSnapshot},
		{"hash", cfg, put64(hotAt, get64(hotAt)^1), ErrSnapshot},
		{"check", cfg, put64(hotAt+8, get64(hotAt+8)+1), ErrSnapshot},
		{"clock out of range", cfg, put64(hotAt+16, maxAbsTime+1), ErrSnapshot},
		{"first", cfg, put64(hotAt+24, get64(hotAt+24)-1), ErrSnapshot},
		{"born after first", cfg, put64(bornAt, get64(hotAt+24)+1), ErrSnapshot},
		{"born before time", cfg, put64(bornAt, 1<<63), ErrSnapshot},
		{"base NaN", cfg, put64(hotAt+32, math.Float64bits(math.NaN())), ErrSnapshot},
		{"base infinite", cfg, put64(hotAt+32, math.Float64bits(math.Inf(1))), ErrSnapshot},
		{"points after the clock", cfg, func(b []byte) []byte {
			// Record 0 has one point; the open buckets after its clock,
			// among the four slots, must be empty.
			clock := int64(get64(hotAt + 16))
			nb := floorDiv(clock, lay.width[0]) + 1
			j := nb & 3
			at := hotAt + 56 + 4*int(j) // n[j] in the hot record
			if j >= 2 {
				at = hotAt + 64 + 12*int(j-2) + 8 // n of extra slot j
			}
			binary.LittleEndian.PutUint32(b[at:], 1)
			return b
		}, ErrSnapshot},
		{"rules-set flag", cfg, func(b []byte) []byte { b[rulesSetAt] = 2; return b }, ErrSnapshot},
		{"incident rule", cfg, func(b []byte) []byte { b[incAt] = 64; return b }, ErrSnapshot},
		{"incident phase", cfg, func(b []byte) []byte { b[incAt+2] = 4; return b }, ErrSnapshot},
		{"duplicate key", cfg, func(b []byte) []byte {
			// Record 0 twice, and the count says so.
			rec := slices.Clone(b[rec0 : rec0+size0])
			b = slices.Insert(b, rec0, rec...)
			n := len(b) - trailerBytes
			binary.LittleEndian.PutUint64(b[n:], binary.LittleEndian.Uint64(b[n:])+1)
			return b
		}, ErrSnapshot},
		{"count", cfg, put64(trailer, get64(trailer)+1), ErrSnapshot},
		{"newest before a clock", cfg, put64(trailer+8, uint64(t0)), ErrSnapshot},
		{"newest unset", cfg, put64(trailer+8, 1<<63), ErrSnapshot},
	}
	for _, tc := range cases {
		b := snap
		if tc.edit != nil {
			b = reseal(tc.edit(slices.Clone(snap)))
		}
		s, _, err := Restore(tc.cfg, bytes.NewReader(b))
		if !errors.Is(err, tc.want) || s != nil {
			t.Errorf("%s: %v, want %v", tc.name, err, tc.want)
		}
	}
}

// Every truncation, every flipped bit and any trailing byte are refused as
// damage, without a panic.
func TestSnapshotDamage(t *testing.T) {
	snap, cfg := smallSnapshot(t)
	cfg.MaxSeries = 1000 // a damaged end tag must not read as one series too many
	try := func(what string, b []byte) {
		t.Helper()
		if s, _, err := Restore(cfg, bytes.NewReader(b)); !errors.Is(err, ErrSnapshot) || s != nil {
			t.Fatalf("%s: %v", what, err)
		}
	}
	for n := range len(snap) {
		try(fmt.Sprint("cut to ", n, " bytes"), snap[:n])
	}
	b := slices.Clone(snap)
	for i := range b {
		for bit := range 8 {
			b[i] ^= 1 << bit
			try(fmt.Sprint("bit ", bit, " of byte ", i, " flipped"), b)
			b[i] ^= 1 << bit
		}
	}
	try("a byte after the trailer", append(slices.Clone(snap), 0))
	try("a snapshot after the trailer", append(slices.Clone(snap), snap...))
	try("nothing", nil)
}

// errReader fails after its bytes.
type errReader struct {
	b   []byte
	err error
}

func (r *errReader) Read(p []byte) (int, error) {
	if len(r.b) == 0 {
		return 0, r.err
	}
	n := copy(p, r.b)
	r.b = r.b[n:]
	return n, nil
}

// A reader's own failure is reported as such, not as damage; so is a
// writer's.
func TestSnapshotIOErrors(t *testing.T) {
	snap, cfg := smallSnapshot(t)
	boom := errors.New("boom")
	for _, n := range []int{0, 10, len(snap) / 2, len(snap)} {
		_, _, err := Restore(cfg, &errReader{b: snap[:n], err: boom})
		if !errors.Is(err, boom) || errors.Is(err, ErrSnapshot) {
			t.Errorf("after %d bytes: %v", n, err)
		}
	}
	s, _ := restore(t, cfg, snap)
	for _, n := range []int{0, 100, len(snap) - 4, len(snap) - 1} {
		w := &failWriter{left: n, err: boom}
		if err := s.WriteSnapshot(w, []byte("m")); !errors.Is(err, boom) {
			t.Errorf("writer failing after %d bytes: %v", n, err)
		}
	}
}

// failWriter fails once left bytes have been written.
type failWriter struct {
	left int
	err  error
}

func (w *failWriter) Write(p []byte) (int, error) {
	if len(p) > w.left {
		n := w.left
		w.left = 0
		return n, w.err
	}
	w.left -= len(p)
	return len(p), nil
}

// Restored into a store with idle expiry, the same series expire as in
// the original, whether or not the original expired series itself.
func TestSnapshotExpiry(t *testing.T) {
	for _, origExpiry := range []time.Duration{0, 6 * time.Hour} {
		t.Run(fmt.Sprint("original expiry ", origExpiry), func(t *testing.T) {
			cfg := Config{Partitions: 8, IdleExpiry: origExpiry}
			orig := newStore(t, cfg)
			keys := fillScenario(t, orig, 3)
			// The newest series is gone: with expiry the store remembers
			// its timestamp, without it the snapshot takes the newest clock.
			last := testKey("newest")
			mustAdd(t, orig, last, t0+30*24*hour, 1)
			if origExpiry != 0 {
				orig.Delete(last)
			}
			snap := snapshot(t, orig, nil)
			rcfg := Config{Partitions: 3, IdleExpiry: 6 * time.Hour}
			b, _ := restore(t, rcfg, snap)
			a := newStore(t, rcfg)
			fillScenario(t, a, 3)
			mustAdd(t, a, last, t0+30*24*hour, 1)
			if origExpiry != 0 {
				a.Delete(last)
			}
			if a.newest() != b.newest() {
				t.Fatalf("newest %d, restored %d", a.newest(), b.newest())
			}
			na, nb := expireAll(a, math.MaxInt64), expireAll(b, math.MaxInt64)
			if na != nb || na == 0 || a.Len() == 0 {
				t.Errorf("expired %d and %d of %d", na, nb, len(keys))
			}
			compareStores(t, a, b)
		})
	}
}

// WriteSnapshot runs beside writers without a race, and what it writes is
// always a valid snapshot, if one that catches each partition at its own
// moment.
func TestSnapshotConcurrent(t *testing.T) {
	cfg := Config{Layout: smallLayout, Partitions: 4, ChunkSize: 16, MaxSeries: 10_000, IdleExpiry: time.Hour}
	s := newStore(t, cfg)
	stop := make(chan struct{})
	var wg sync.WaitGroup
	for w := range 3 {
		wg.Go(func() {
			rng := rand.New(rand.NewPCG(uint64(w), 1))
			var es []Entry
			for i := 0; ; i++ {
				select {
				case <-stop:
					return
				default:
				}
				k := testKey(fmt.Sprint("c", w, "/", rng.IntN(300)))
				ts := t0 + int64(i)*sec
				switch rng.IntN(10) {
				case 0:
					s.Delete(k)
				case 1:
					es = append(es[:0], Entry{Key: k, TS: ts, Value: 1}, Entry{Key: testKey(fmt.Sprint("b", i%50)), TS: ts, Value: 2})
					s.AddBatch(es, nil)
				case 2:
					s.Do(k, func(se *Series) { se.Incident(uint16(i%64), true).Phase = Open })
				case 3:
					s.Expire(math.MaxInt64)
				default:
					if err := s.Add(k, ts, float64(i), nil); err != nil {
						t.Error(err)
						return
					}
				}
			}
		})
	}
	for i := range 20 {
		var b bytes.Buffer
		if err := s.WriteSnapshot(&b, []byte{byte(i)}); err != nil {
			t.Fatal(err)
		}
		r, meta, err := Restore(cfg, &b)
		if err != nil || !bytes.Equal(meta, []byte{byte(i)}) {
			t.Fatalf("snapshot %d: %v", i, err)
		}
		statesOf(r)
	}
	close(stop)
	wg.Wait()
}

// On a big-endian machine blocks are swapped to little-endian and back;
// here the swap is checked against encoding/binary on a filled block.
func TestSwapBlock(t *testing.T) {
	for _, tc := range snapConfigs {
		s := newStore(t, tc.cfg)
		lay := s.cfg.lay
		blk := make([]byte, lay.blockBytes)
		for i := range blk {
			blk[i] = byte(i*7 + 1)
		}
		sw := slices.Clone(blk)
		swapBlock(lay, sw)
		le, be := binary.LittleEndian, binary.BigEndian
		for i := 0; i < headerBytes; i += 8 {
			if le.Uint64(blk[i:]) != be.Uint64(sw[i:]) {
				t.Fatalf("%s: header word %d", tc.name, i/8)
			}
		}
		r0 := block(blk).ring(lay, 0)
		for i := range lay.count[0] {
			m, c := r0.at(i)
			at := int(uintptr(unsafe.Pointer(m)) - uintptr(unsafe.Pointer(&blk[0])))
			ct := int(uintptr(unsafe.Pointer(c)) - uintptr(unsafe.Pointer(&blk[0])))
			if le.Uint32(blk[at:]) != be.Uint32(sw[at:]) || le.Uint16(blk[ct:]) != be.Uint16(sw[ct:]) {
				t.Fatalf("%s: finest bucket %d", tc.name, i)
			}
		}
		for l := 1; l < lay.n; l++ {
			for i := range int(lay.count[l]) {
				at, ct := lay.meanAt[l]+4*i, lay.countAt[l]+2*i
				if le.Uint32(blk[at:]) != be.Uint32(sw[at:]) || le.Uint16(blk[ct:]) != be.Uint16(sw[ct:]) {
					t.Fatalf("%s: level %d bucket %d", tc.name, l, i)
				}
			}
		}
		swapBlock(lay, sw)
		if !bytes.Equal(sw, blk) {
			t.Errorf("%s: swapping twice changed the block", tc.name)
		}
	}
}

// The record sizes the reader assumes are those the writer produces.
func TestSnapshotRecordSize(t *testing.T) {
	for _, tc := range snapConfigs {
		s := newStore(t, tc.cfg)
		k := testKey("size{a=\"b\"}")
		mustAdd(t, s, k, t0, 1)
		s.Do(k, func(se *Series) {
			se.Incident(3, true)
			se.Incident(5, true)
			rec := appendRecord(nil, se.ch, int(se.row))
			want := 1 + recFixedBytes + (s.cfg.lay.slots-2)*extraBytes + len(k.Text) + 2*incidentBytes
			if len(rec) != want {
				t.Errorf("%s: record of %d bytes, want %d", tc.name, len(rec), want)
			}
		})
		if got := len(appendSnapHeader(nil, s.cfg.lay, nil)); got != snapHeaderBytes {
			t.Errorf("header of %d bytes, want %d", got, snapHeaderBytes)
		}
	}
}
