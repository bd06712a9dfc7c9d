package state

// Snapshots: the whole state of a Store as one byte stream, so that a
// restarted process can resume exactly where a snapshot left off.
//
// Format, version 1. Numbers are little-endian; floats are stored by their
// bits, so NaN payloads and -0 survive.
//
//	header
//	  magic       8 bytes "HRSTSNAP"
//	  version     u32, 1
//	  levels      u32 n (1 to 4), then 4 × (width ms i64, count i64), unused ones zero
//	  lateness    i64 ms
//	  meta        u32 length (at most 1 MiB), then the caller's bytes
//	  header CRC  u32: CRC-32C of the header before it
//	records, each:
//	  tag         u8: 1 for a series, 0 for the end of the records
//	  key length  u32 (at most 1 MiB)
//	  incidents   u8 (at most 64)
//	  hot record  hash u64, check u64, clock i64, first i64, base f64,
//	              sum f64 ×2, n u32 ×2
//	  extra slots when the lateness exceeds one finest width: (sum f64, n u32) ×2
//	  born        i64
//	  memo        evaluated i64, rules u64, rules set u8 (0 or 1),
//	              published at i64, mean, upper, lower f32,
//	              cycle at i64, period i32, period2 i32, acf f32,
//	              calibration scale f32 ×6, due i64 ×2, mean f32 ×2, sd f32 ×2, seen u32
//	  key         the key text
//	  incident ×n rule u16, phase u8, id 16 bytes, since i64, emitted i64,
//	              prob f32, eta i64, opened i64, threshed i64
//	  block       the series' bucket memory as block.go lays it out, its
//	              numbers little-endian
//	trailer
//	  series      u64: records written
//	  newest      i64: newest timestamp applied, for idle expiry (without
//	              expiry the newest series clock); MinInt64 if none
//	  CRC         u32: CRC-32C of every byte before it
//
// The series count and the newest timestamp come last because the writer
// learns them only while it walks the partitions, taking one lock at a
// time. The header has a CRC of its own so that a damaged layout or meta
// is reported as damage before the layout is compared with the reader's.

import (
	"bufio"
	"encoding/binary"
	"errors"
	"fmt"
	"hash/crc32"
	"io"
	"math"
	"slices"
	"unsafe"
)

// Errors of Restore. They are wrapped with detail.
var (
	ErrSnapshot       = errors.New("snapshot is damaged or truncated")
	ErrSnapshotLayout = errors.New("snapshot was written with another bucket layout")
)

const (
	snapMagic   = "HRSTSNAP"
	snapVersion = 1

	maxSnapMeta  = 1 << 20 // bytes of caller meta
	maxSnapKey   = 1 << 20 // bytes of a key: far above what the decoders let through
	maxIncidents = 64      // rules are numbered below 64 (Memo.Rules is a bitmask)

	snapHeaderBytes = 8 + 4 + 4 + maxLevels*16 + 8 + 4
	recFixedBytes   = 4 + 1 + 64 + 8 + 117 // key length, incidents, hot record, born, memo
	extraBytes      = 12                   // one extra slot
	incidentBytes   = 2 + 1 + 16 + 8 + 8 + 4 + 8 + 8 + 8
	trailerBytes    = 8 + 8 + 4

	tagEnd    = 0
	tagSeries = 1

	snapBuffer = 64 << 10 // bufio buffer of either side
	readStep   = 64 << 10 // variable-length fields are read in steps of this size
)

// crcWriter passes writes on to w and keeps the CRC-32C of what it passed.
type crcWriter struct {
	w   io.Writer
	tab *crc32.Table
	crc uint32
}

func (c *crcWriter) Write(p []byte) (int, error) {
	c.crc = crc32.Update(c.crc, c.tab, p)
	return c.w.Write(p)
}

// WriteSnapshot writes every live series of s, and meta (opaque bytes of the
// caller's, at most 1 MiB, e.g. the stream sequence the state covers), to w.
// It takes each partition lock in turn; for a snapshot consistent across
// partitions the caller must hold off writers (Add, AddBatch, Delete,
// Expire) while it runs. Without that the snapshot is still well formed,
// but each partition is caught at its own moment. A partition's lock is
// held while its series are written, so a slow w holds up its writers.
//
// WriteSnapshot refuses, rather than write what Restore would refuse, a
// series with a key over 1 MiB, a hash other than that of its key, or an
// incident of a rule numbered 64 or more, in an unknown phase or beside
// another of its rule.
func (s *Store) WriteSnapshot(w io.Writer, meta []byte) error {
	if len(meta) > maxSnapMeta {
		return fmt.Errorf("state: snapshot meta of %d bytes exceeds %d", len(meta), maxSnapMeta)
	}
	lay := s.cfg.lay
	cw := &crcWriter{w: w, tab: crc32.MakeTable(crc32.Castagnoli)}
	bw := bufio.NewWriterSize(cw, snapBuffer)

	buf := make([]byte, 0, 4096)
	buf = appendSnapHeader(buf, lay, meta)
	buf = binary.LittleEndian.AppendUint32(buf, crc32.Checksum(buf, cw.tab))
	bw.Write(buf) // bufio keeps the first error; checked below

	le := littleEndian()
	var count uint64
	newest := s.newest()
	for i := range s.parts {
		p := &s.parts[i]
		p.mu.Lock()
		for _, c := range p.chunks {
			for row := range c.used {
				se := &c.series[row]
				if !se.live {
					continue
				}
				if err := writable(se); err != nil {
					p.mu.Unlock()
					return fmt.Errorf("state: snapshot of series %.100q: %w", se.key, err)
				}
				buf = appendRecord(buf[:0], c, row)
				blk := c.block(row)
				if !le {
					n := len(buf)
					buf = append(buf, blk...)
					swapBlock(lay, buf[n:])
					blk = nil
				}
				bw.Write(buf)
				bw.Write(blk)
				newest = max(newest, c.hot[row].clock)
				count++
			}
		}
		p.mu.Unlock()
		// A write of nothing returns the first error the writer met.
		if _, err := bw.Write(nil); err != nil {
			return fmt.Errorf("state: writing snapshot: %w", err)
		}
	}
	// The newest timestamp applied is at least every clock; without
	// expiry the store does not keep it and the clocks stand in for it.
	newest = max(newest, s.newest())
	buf = append(buf[:0], tagEnd)
	buf = binary.LittleEndian.AppendUint64(buf, count)
	buf = binary.LittleEndian.AppendUint64(buf, uint64(newest))
	bw.Write(buf)
	if err := bw.Flush(); err != nil {
		return fmt.Errorf("state: writing snapshot: %w", err)
	}
	if _, err := w.Write(binary.LittleEndian.AppendUint32(buf[:0], cw.crc)); err != nil {
		return fmt.Errorf("state: writing snapshot: %w", err)
	}
	return nil
}

// appendSnapHeader appends the header up to its CRC.
func appendSnapHeader(b []byte, lay *layout, meta []byte) []byte {
	b = append(b, snapMagic...)
	b = binary.LittleEndian.AppendUint32(b, snapVersion)
	b = binary.LittleEndian.AppendUint32(b, uint32(lay.n))
	for l := range maxLevels {
		b = binary.LittleEndian.AppendUint64(b, uint64(lay.width[l]))
		b = binary.LittleEndian.AppendUint64(b, uint64(lay.count[l]))
	}
	b = binary.LittleEndian.AppendUint64(b, uint64(lay.late))
	b = binary.LittleEndian.AppendUint32(b, uint32(len(meta)))
	return append(b, meta...)
}

// appendRecord appends the record of the series in row of c up to its
// block.
func appendRecord(b []byte, c *chunk, row int) []byte {
	le := binary.LittleEndian
	se, h := &c.series[row], &c.hot[row]
	b = append(b, tagSeries)
	b = le.AppendUint32(b, uint32(len(se.key)))
	b = append(b, uint8(len(se.incidents)))
	b = le.AppendUint64(b, h.hash)
	b = le.AppendUint64(b, h.check)
	b = le.AppendUint64(b, uint64(h.clock))
	b = le.AppendUint64(b, uint64(h.first))
	b = le.AppendUint64(b, math.Float64bits(h.base))
	b = le.AppendUint64(b, math.Float64bits(h.sum[0]))
	b = le.AppendUint64(b, math.Float64bits(h.sum[1]))
	b = le.AppendUint32(b, h.n[0])
	b = le.AppendUint32(b, h.n[1])
	for _, x := range c.extraOf(row) {
		b = le.AppendUint64(b, math.Float64bits(x.sum))
		b = le.AppendUint32(b, x.n)
	}
	b = le.AppendUint64(b, uint64(se.born))

	m := &se.memo
	b = le.AppendUint64(b, uint64(m.Evaluated))
	b = le.AppendUint64(b, m.Rules)
	b = append(b, boolByte(m.RulesSet))
	b = le.AppendUint64(b, uint64(m.Published.At))
	b = appendF32(b, m.Published.Mean)
	b = appendF32(b, m.Published.Upper)
	b = appendF32(b, m.Published.Lower)
	b = le.AppendUint64(b, uint64(m.Cycle.At))
	b = le.AppendUint32(b, uint32(m.Cycle.Period))
	b = le.AppendUint32(b, uint32(m.Cycle.Period2))
	b = appendF32(b, m.Cycle.ACF)
	for _, x := range m.Calib.Scale {
		b = appendF32(b, x)
	}
	for _, x := range m.Calib.Due {
		b = le.AppendUint64(b, uint64(x))
	}
	for _, x := range m.Calib.Mean {
		b = appendF32(b, x)
	}
	for _, x := range m.Calib.SD {
		b = appendF32(b, x)
	}
	b = le.AppendUint32(b, m.Calib.Seen)

	b = append(b, se.key...)
	for i := range se.incidents {
		in := &se.incidents[i]
		b = le.AppendUint16(b, in.Rule)
		b = append(b, uint8(in.Phase))
		b = append(b, in.ID[:]...)
		b = le.AppendUint64(b, uint64(in.Since))
		b = le.AppendUint64(b, uint64(in.Emitted))
		b = appendF32(b, in.Prob)
		b = le.AppendUint64(b, uint64(in.ETA))
		b = le.AppendUint64(b, uint64(in.Opened))
		b = le.AppendUint64(b, uint64(in.Threshed))
	}
	return b
}

func appendF32(b []byte, x float32) []byte {
	return binary.LittleEndian.AppendUint32(b, math.Float32bits(x))
}

func boolByte(x bool) byte {
	if x {
		return 1
	}
	return 0
}

// writable refuses a series that Restore would refuse, rather than write
// a snapshot that cannot be read back.
func writable(se *Series) error {
	if len(se.key) > maxSnapKey {
		return fmt.Errorf("key of %d bytes exceeds %d", len(se.key), maxSnapKey)
	}
	// A caller may have handed Add a key whose Hash is not that of its
	// text; Restore, which must trust no hash, would refuse it.
	h := se.hot()
	if hash, check := hashes(unsafe.Slice(unsafe.StringData(se.key), len(se.key))); hash != h.hash || check != h.check {
		return fmt.Errorf("hash %#x is not the FNV-1a hash %#x of the key", h.hash, hash)
	}
	if len(se.incidents) > maxIncidents {
		return fmt.Errorf("%d incidents, at most %d", len(se.incidents), maxIncidents)
	}
	return checkIncidents(se.incidents)
}

// checkIncidents refuses incidents a snapshot cannot hold: more than one
// per rule, rules numbered 64 or more, or an unknown phase.
func checkIncidents(incs []Incident) error {
	var rules uint64
	for i := range incs {
		in := &incs[i]
		switch {
		case in.Rule >= maxIncidents:
			return fmt.Errorf("incident rule %d, rules are numbered below %d", in.Rule, maxIncidents)
		case rules&(1<<in.Rule) != 0:
			return fmt.Errorf("two incidents of rule %d", in.Rule)
		case in.Phase > Closing:
			return fmt.Errorf("incident of rule %d in phase %d", in.Rule, in.Phase)
		}
		rules |= 1 << in.Rule
	}
	return nil
}

// Restore returns a new Store configured by cfg and filled from a snapshot
// read from r, and the meta stored with it. cfg's layout and lateness must
// equal the snapshot's (else an error wrapping ErrSnapshotLayout); the
// number of partitions, chunk size, series limit and idle expiry may
// differ. A snapshot holding more series than cfg.MaxSeries is refused
// (error wrapping ErrSeriesCap). Corrupt or truncated input returns an
// error wrapping ErrSnapshot, never panics, and never allocates more than
// the input justifies: memory is taken as the records arrive, never from a
// length field alone.
//
// With IdleExpiry set, the restored store measures idleness from the
// newest timestamp the snapshot's store had applied, so the same series
// are idle as before.
func Restore(cfg Config, r io.Reader) (*Store, []byte, error) {
	s, err := New(cfg)
	if err != nil {
		return nil, nil, err
	}
	d := &snapReader{br: bufio.NewReaderSize(r, snapBuffer), tab: crc32.MakeTable(crc32.Castagnoli)}
	meta, err := d.header(s.cfg.lay)
	if err != nil {
		return nil, nil, err
	}
	// The store is not shared yet: no partition lock is needed.
	maxClock := int64(math.MinInt64)
	var count uint64
	for {
		tag, err := d.tag()
		if err != nil {
			return nil, nil, err
		}
		if tag == tagEnd {
			break
		}
		if tag != tagSeries {
			return nil, nil, fmt.Errorf("%w: record %d has tag %d", ErrSnapshot, count, tag)
		}
		clock, err := s.restoreSeries(d)
		if err != nil {
			return nil, nil, fmt.Errorf("%w (record %d)", err, count)
		}
		maxClock = max(maxClock, clock)
		count++
	}

	le := binary.LittleEndian
	t, err := d.bytes(trailerBytes - 4)
	if err != nil {
		return nil, nil, err
	}
	n, newest := le.Uint64(t), int64(le.Uint64(t[8:]))
	want := d.crc
	if t, err = d.bytes(4); err != nil {
		return nil, nil, err
	}
	if got := le.Uint32(t); got != want {
		return nil, nil, fmt.Errorf("%w: CRC %#08x, computed %#08x", ErrSnapshot, got, want)
	}
	if _, err := d.br.ReadByte(); err == nil {
		return nil, nil, fmt.Errorf("%w: bytes after the trailer", ErrSnapshot)
	} else if err != io.EOF {
		return nil, nil, fmt.Errorf("state: reading snapshot: %w", err)
	}
	switch {
	case n != count:
		return nil, nil, fmt.Errorf("%w: the trailer counts %d series, %d were read", ErrSnapshot, n, count)
	case newest == math.MinInt64 && count == 0:
	case newest < -maxAbsTime || newest > maxAbsTime || newest < maxClock:
		return nil, nil, fmt.Errorf("%w: newest timestamp %d (newest series clock %d)", ErrSnapshot, newest, maxClock)
	}
	if newest != math.MinInt64 {
		for i := range s.exp.clocks {
			s.exp.clocks[i].t.Store(newest)
		}
	}
	return s, meta, nil
}

// restoreSeries reads the record of one series, after its tag, and adds
// the series to s. It returns the series' clock.
func (s *Store) restoreSeries(d *snapReader) (int64, error) {
	lay := s.cfg.lay
	nx := lay.slots - 2
	size := recFixedBytes + nx*extraBytes
	if cap(d.fix) < size {
		d.fix = make([]byte, size)
	}
	if err := d.full(d.fix[:size]); err != nil {
		return 0, err
	}
	f := fields(d.fix[:size])
	keyLen, nInc := f.u32(), int(f.u8())
	h := hot{hash: f.u64(), check: f.u64(), clock: int64(f.u64()), first: int64(f.u64()), base: f.f64()}
	h.sum[0], h.sum[1] = f.f64(), f.f64()
	h.n[0], h.n[1] = f.u32(), f.u32()
	var extra [openSlots - 2]extraSlot
	for i := range nx {
		extra[i].sum, extra[i].n = f.f64(), f.u32()
	}
	born := int64(f.u64())
	var m Memo
	m.Evaluated, m.Rules = int64(f.u64()), f.u64()
	rulesSet := f.u8()
	m.RulesSet = rulesSet == 1
	m.Published = Published{At: int64(f.u64()), Mean: f.f32(), Upper: f.f32(), Lower: f.f32()}
	m.Cycle = CycleMemo{At: int64(f.u64()), Period: int32(f.u32()), Period2: int32(f.u32()), ACF: f.f32()}
	c := &m.Calib
	for i := range c.Scale {
		c.Scale[i] = f.f32()
	}
	for i := range c.Due {
		c.Due[i] = int64(f.u64())
	}
	for i := range c.Mean {
		c.Mean[i] = f.f32()
	}
	for i := range c.SD {
		c.SD[i] = f.f32()
	}
	c.Seen = f.u32()

	switch {
	case keyLen > maxSnapKey:
		return 0, fmt.Errorf("%w: key of %d bytes", ErrSnapshot, keyLen)
	case nInc > maxIncidents:
		return 0, fmt.Errorf("%w: %d incidents", ErrSnapshot, nInc)
	case rulesSet > 1:
		return 0, fmt.Errorf("%w: rules-set flag %d", ErrSnapshot, rulesSet)
	}
	if err := checkHot(lay, &h, extra[:nx], born); err != nil {
		return 0, fmt.Errorf("%w: %w", ErrSnapshot, err)
	}
	text, err := d.bytes(int(keyLen))
	if err != nil {
		return 0, err
	}
	k := Key{Text: text}
	if k.Hash, k.Check = hashes(text); k.Hash != h.hash || k.Check != h.check {
		return 0, fmt.Errorf("%w: hashes %#x/%#x of key %q, %#x/%#x stored", ErrSnapshot, k.Hash, k.Check, text, h.hash, h.check)
	}
	p := s.part(k.Hash)
	if _, dup := p.lookup(k); dup {
		return 0, fmt.Errorf("%w: key %q twice", ErrSnapshot, text)
	}
	// Checked once the record has proved sound, so that damage never
	// passes for a full store.
	if s.Len() >= s.cfg.maxSeries {
		return 0, fmt.Errorf("%w: the snapshot holds more than %d series", ErrSeriesCap, s.cfg.maxSeries)
	}
	ref, err := p.alloc(s.cfg.chunkSize, lay)
	if err != nil {
		return 0, err
	}
	s.n.Add(1)
	ch, row := p.at(ref)
	ch.hot[row] = h
	copy(ch.extraOf(row), extra[:nx])
	p.insert(k, ref)
	se := &ch.series[row]
	*se = Series{row: int32(row), live: true, ch: ch, key: string(text), born: born, memo: m}

	if nInc > 0 {
		raw, err := d.bytes(nInc * incidentBytes)
		if err != nil {
			return 0, err
		}
		se.incidents = make([]Incident, nInc)
		f := fields(raw)
		for i := range se.incidents {
			in := &se.incidents[i]
			in.Rule, in.Phase = f.u16(), Phase(f.u8())
			copy(in.ID[:], f.next(len(in.ID)))
			in.Since, in.Emitted, in.Prob = int64(f.u64()), int64(f.u64()), f.f32()
			in.ETA, in.Opened, in.Threshed = int64(f.u64()), int64(f.u64()), int64(f.u64())
		}
		if err := checkIncidents(se.incidents); err != nil {
			return 0, fmt.Errorf("%w: %w", ErrSnapshot, err)
		}
	}
	// The block goes straight into the series' memory.
	blk := ch.block(row)
	if err := d.full(blk); err != nil {
		return 0, err
	}
	if !littleEndian() {
		swapBlock(lay, blk)
	}
	return h.clock, nil
}

// checkHot refuses a hot record, extra open slots and birth bucket that no
// sequence of points could have left: the clock within the accepted
// timestamps, first the oldest open bucket of the clock, born not after
// it, a finite base, and the slots of open buckets newer than the clock
// empty.
func checkHot(lay *layout, h *hot, extra []extraSlot, born int64) error {
	w0 := lay.width[0]
	if h.clock < -maxAbsTime || h.clock > maxAbsTime {
		return fmt.Errorf("clock %d out of range", h.clock)
	}
	if want := floorDiv(h.clock-lay.late, w0); h.first != want {
		return fmt.Errorf("oldest open bucket %d, the clock %d makes it %d", h.first, h.clock, want)
	}
	if born > h.first || born < floorDiv(-maxAbsTime-lay.late, w0) {
		return fmt.Errorf("birth bucket %d, oldest open bucket %d", born, h.first)
	}
	if math.IsNaN(h.base) || math.IsInf(h.base, 0) {
		return fmt.Errorf("base %v", h.base)
	}
	for b := floorDiv(h.clock, w0) + 1; b < h.first+int64(lay.slots); b++ {
		// The slot of bucket b, as chunk.slot finds it.
		n, sum := h.n[b&1], h.sum[b&1]
		if lay.slots > 2 {
			if j := b & (openSlots - 1); j >= 2 {
				n, sum = extra[j-2].n, extra[j-2].sum
			} else {
				n, sum = h.n[j], h.sum[j]
			}
		}
		if n != 0 || math.Float64bits(sum) != 0 {
			return fmt.Errorf("open bucket %d, after the clock, holds %d points", b, n)
		}
	}
	return nil
}

// snapReader reads a snapshot, keeping the CRC-32C of what it read.
type snapReader struct {
	br  *bufio.Reader
	tab *crc32.Table
	crc uint32
	buf []byte // scratch for variable-length fields, reused
	fix []byte // scratch for the fixed part of a record, reused
	one [1]byte
}

// full reads len(p) bytes into p.
func (d *snapReader) full(p []byte) error {
	if _, err := io.ReadFull(d.br, p); err != nil {
		return readError(err)
	}
	d.crc = crc32.Update(d.crc, d.tab, p)
	return nil
}

// tag reads the tag of the next record.
func (d *snapReader) tag() (byte, error) {
	b, err := d.br.ReadByte()
	if err != nil {
		return 0, readError(err)
	}
	d.one[0] = b
	d.crc = crc32.Update(d.crc, d.tab, d.one[:])
	return b, nil
}

// readError tells the end of the input, which means the snapshot is
// truncated, from a failure of the reader.
func readError(err error) error {
	if err == io.EOF || err == io.ErrUnexpectedEOF {
		return fmt.Errorf("%w: the input ends early", ErrSnapshot)
	}
	return fmt.Errorf("state: reading snapshot: %w", err)
}

// bytes reads the next n bytes into the scratch buffer and returns them.
// The buffer grows as the bytes arrive, not from n alone, so that a
// forged length costs no more memory than the input that comes with it.
func (d *snapReader) bytes(n int) ([]byte, error) {
	d.buf = d.buf[:0]
	for n > 0 {
		k := min(n, readStep)
		at := len(d.buf)
		d.buf = slices.Grow(d.buf, k)[:at+k]
		if err := d.full(d.buf[at:]); err != nil {
			return nil, err
		}
		n -= k
	}
	return d.buf, nil
}

// header reads the header, checks it and its layout against lay and
// returns a copy of the meta.
func (d *snapReader) header(lay *layout) ([]byte, error) {
	hb, err := d.bytes(snapHeaderBytes)
	if err != nil {
		return nil, err
	}
	if string(hb[:len(snapMagic)]) != snapMagic {
		return nil, fmt.Errorf("%w: not a state snapshot", ErrSnapshot)
	}
	f := fields(hb[len(snapMagic):])
	if v := f.u32(); v != snapVersion {
		return nil, fmt.Errorf("%w: format version %d, want %d", ErrSnapshot, v, snapVersion)
	}
	n := f.u32()
	var width, count [maxLevels]int64
	for l := range maxLevels {
		width[l], count[l] = int64(f.u64()), int64(f.u64())
	}
	late := int64(f.u64())
	metaLen := f.u32()
	if metaLen > maxSnapMeta {
		return nil, fmt.Errorf("%w: meta of %d bytes", ErrSnapshot, metaLen)
	}
	mb, err := d.bytes(int(metaLen))
	if err != nil {
		return nil, err
	}
	meta := slices.Clone(mb)
	want := d.crc
	cb, err := d.bytes(4)
	if err != nil {
		return nil, err
	}
	if got := binary.LittleEndian.Uint32(cb); got != want {
		return nil, fmt.Errorf("%w: header CRC %#08x, computed %#08x", ErrSnapshot, got, want)
	}
	if n < 1 || n > maxLevels {
		return nil, fmt.Errorf("%w: %d levels", ErrSnapshot, n)
	}
	for l := n; l < maxLevels; l++ {
		if width[l] != 0 || count[l] != 0 {
			return nil, fmt.Errorf("%w: level %d of %d is set", ErrSnapshot, l, n)
		}
	}
	if int(n) != lay.n || width != lay.width || count != lay.count || late != lay.late {
		return nil, fmt.Errorf("%w: the snapshot has %s, the store %s", ErrSnapshotLayout,
			layoutString(width[:n], count[:n], late), layoutString(lay.width[:lay.n], lay.count[:lay.n], lay.late))
	}
	return meta, nil
}

// layoutString describes a layout in milliseconds, for errors.
func layoutString(width, count []int64, late int64) string {
	b := []byte("levels")
	for l := range width {
		b = fmt.Appendf(b, " %dms×%d", width[l], count[l])
	}
	return string(fmt.Appendf(b, ", lateness %dms", late))
}

// fields reads little-endian numbers off the front of a byte slice whose
// length the caller has made sufficient.
type fields []byte

func (f *fields) next(n int) []byte {
	b := (*f)[:n]
	*f = (*f)[n:]
	return b
}

func (f *fields) u8() uint8    { return f.next(1)[0] }
func (f *fields) u16() uint16  { return binary.LittleEndian.Uint16(f.next(2)) }
func (f *fields) u32() uint32  { return binary.LittleEndian.Uint32(f.next(4)) }
func (f *fields) u64() uint64  { return binary.LittleEndian.Uint64(f.next(8)) }
func (f *fields) f32() float32 { return math.Float32frombits(f.u32()) }
func (f *fields) f64() float64 { return math.Float64frombits(f.u64()) }

// littleEndian reports whether the machine stores numbers little-endian,
// as the snapshot format does: then blocks are copied as they are.
func littleEndian() bool {
	return binary.NativeEndian.Uint16([]byte{1, 0}) == 1
}

// swapBlock reverses the byte order of every number in block b, laid out
// by lay, turning a block of a big-endian machine into the snapshot's
// little-endian form and back.
func swapBlock(lay *layout, b []byte) {
	swap := func(p []byte) { slices.Reverse(p) }
	for i := 0; i < headerBytes; i += 8 { // the header is 8-byte words
		swap(b[i : i+8])
	}
	for ln := range lines0(lay) {
		at := headerBytes + ln*cacheLine
		for i := range perLine0 {
			swap(b[at+4*i : at+4*i+4])
			swap(b[at+4*perLine0+2*i : at+4*perLine0+2*i+2])
		}
	}
	for l := 1; l < lay.n; l++ {
		for i := range int(lay.count[l]) {
			swap(b[lay.meanAt[l]+4*i : lay.meanAt[l]+4*i+4])
			swap(b[lay.countAt[l]+2*i : lay.countAt[l]+2*i+2])
		}
	}
}
