package stream

import (
	"encoding/binary"
	"fmt"
	"math"
)

// The msgpack side reads the message in place following the msgpack
// specification: strings are sub-slices of the message and nothing is
// allocated, unlike decoders that hand out a new string per call.

// mpKind is the family of a msgpack value.
type mpKind uint8

const (
	mpBad   mpKind = iota // truncated or the never-used byte 0xc1
	mpNil                 // nil
	mpBool                // true, false
	mpInt                 // fixint, negative fixint, int 8-64: value in u as int64 bits
	mpUint                // uint 8-64: value in u
	mpFloat               // float 32, float 64: value in f
	mpStr                 // str family: n payload bytes at next
	mpBin                 // bin family: n payload bytes at next
	mpArray               // array family: n elements from next
	mpMap                 // map family: n key/value pairs from next
	mpExt                 // ext family: type x, n payload bytes at next
)

// mpTimestampExt is the extension type of the msgpack timestamp.
const mpTimestampExt = -1

// mpIsContainer reports whether c starts a msgpack map or array.
func mpIsContainer(c byte) bool {
	return c >= 0x80 && c <= 0x9f || c >= 0xdc && c <= 0xdf
}

// mpHead decodes the header of the value at b[i]. Payloads of str, bin and
// ext are checked to lie within b; nested values are not looked at.
func mpHead(b []byte, i int) (k mpKind, n int, u uint64, f float64, x int8, next int) {
	if i >= len(b) {
		return mpBad, 0, 0, 0, 0, i
	}
	c := b[i]
	i++
	rest := b[i:]
	switch {
	case c <= 0x7f:
		return mpInt, 0, uint64(c), 0, 0, i
	case c >= 0xe0:
		return mpInt, 0, uint64(int64(int8(c))), 0, 0, i
	case c <= 0x8f:
		return mpMap, int(c & 0x0f), 0, 0, 0, i
	case c <= 0x9f:
		return mpArray, int(c & 0x0f), 0, 0, 0, i
	case c <= 0xbf:
		k, n = mpStr, int(c&0x1f)
	case c == 0xc0:
		return mpNil, 0, 0, 0, 0, i
	case c == 0xc2 || c == 0xc3:
		return mpBool, 0, 0, 0, 0, i
	case c == 0xc4 || c == 0xd9: // bin 8, str 8
		if len(rest) < 1 {
			return mpBad, 0, 0, 0, 0, i
		}
		k, n, i = mpStr, int(rest[0]), i+1
		if c == 0xc4 {
			k = mpBin
		}
	case c == 0xc5 || c == 0xda: // bin 16, str 16
		if len(rest) < 2 {
			return mpBad, 0, 0, 0, 0, i
		}
		k, n, i = mpStr, int(binary.BigEndian.Uint16(rest)), i+2
		if c == 0xc5 {
			k = mpBin
		}
	case c == 0xc6 || c == 0xdb: // bin 32, str 32
		if len(rest) < 4 {
			return mpBad, 0, 0, 0, 0, i
		}
		v := binary.BigEndian.Uint32(rest)
		if uint64(v) > uint64(len(rest)) { // also keeps int conversion safe on 32-bit
			return mpBad, 0, 0, 0, 0, i
		}
		k, n, i = mpStr, int(v), i+4
		if c == 0xc6 {
			k = mpBin
		}
	case c >= 0xc7 && c <= 0xc9: // ext 8, 16, 32
		w := 1 << (c - 0xc7) // width of the length
		if len(rest) < w+1 {
			return mpBad, 0, 0, 0, 0, i
		}
		switch w {
		case 1:
			n = int(rest[0])
		case 2:
			n = int(binary.BigEndian.Uint16(rest))
		default:
			v := binary.BigEndian.Uint32(rest)
			if uint64(v) > uint64(len(rest)) {
				return mpBad, 0, 0, 0, 0, i
			}
			n = int(v)
		}
		k, x, i = mpExt, int8(rest[w]), i+w+1
	case c >= 0xd4 && c <= 0xd8: // fixext 1, 2, 4, 8, 16
		if len(rest) < 1 {
			return mpBad, 0, 0, 0, 0, i
		}
		k, n, x, i = mpExt, 1<<(c-0xd4), int8(rest[0]), i+1
	case c == 0xca:
		if len(rest) < 4 {
			return mpBad, 0, 0, 0, 0, i
		}
		return mpFloat, 0, 0, float64(math.Float32frombits(binary.BigEndian.Uint32(rest))), 0, i + 4
	case c == 0xcb:
		if len(rest) < 8 {
			return mpBad, 0, 0, 0, 0, i
		}
		return mpFloat, 0, 0, math.Float64frombits(binary.BigEndian.Uint64(rest)), 0, i + 8
	case c >= 0xcc && c <= 0xd3: // uint 8-64, int 8-64
		w := 1 << ((c - 0xcc) & 3)
		if len(rest) < w {
			return mpBad, 0, 0, 0, 0, i
		}
		signed := c >= 0xd0
		switch w {
		case 1:
			u = uint64(rest[0])
			if signed {
				u = uint64(int64(int8(u)))
			}
		case 2:
			u = uint64(binary.BigEndian.Uint16(rest))
			if signed {
				u = uint64(int64(int16(u)))
			}
		case 4:
			u = uint64(binary.BigEndian.Uint32(rest))
			if signed {
				u = uint64(int64(int32(u)))
			}
		default:
			u = binary.BigEndian.Uint64(rest)
		}
		k = mpUint
		if signed {
			k = mpInt
		}
		return k, 0, u, 0, 0, i + w
	case c == 0xdc || c == 0xde: // array 16, map 16
		if len(rest) < 2 {
			return mpBad, 0, 0, 0, 0, i
		}
		k = mpArray
		if c == 0xde {
			k = mpMap
		}
		return k, int(binary.BigEndian.Uint16(rest)), 0, 0, 0, i + 2
	case c == 0xdd || c == 0xdf: // array 32, map 32
		if len(rest) < 4 {
			return mpBad, 0, 0, 0, 0, i
		}
		k = mpArray
		if c == 0xdf {
			k = mpMap
		}
		v := binary.BigEndian.Uint32(rest)
		if uint64(v) > uint64(len(rest)) { // every element takes a byte
			return mpBad, 0, 0, 0, 0, i
		}
		return k, int(v), 0, 0, 0, i + 4
	default: // 0xc1
		return mpBad, 0, 0, 0, 0, i
	}
	if n > len(b)-i {
		return mpBad, 0, 0, 0, 0, i
	}
	return k, n, 0, 0, x, i
}

// mpSkip skips the value at b[i] with its nested values. It counts the
// values still owed instead of recursing, so nesting depth costs no stack.
func mpSkip(b []byte, i int) (int, bool) {
	for owed := 1; owed > 0; owed-- {
		k, n, _, _, _, next := mpHead(b, i)
		switch k {
		case mpBad:
			return next, false
		case mpStr, mpBin, mpExt:
			i = next + n
		case mpArray:
			owed += n
			i = next
		case mpMap:
			owed += 2 * n
			i = next
		default:
			i = next
		}
		// Every value takes at least one byte.
		if owed-1 > len(b)-i {
			return len(b), false
		}
	}
	return i, true
}

// mpText reads the value at b[i] when it is a str or bin. For any other
// kind it returns that kind and where its header ends. The fixstr test is
// inlined because names and label values are nearly always short strings.
func mpText(b []byte, i int) (s []byte, next int, k mpKind) {
	if i < len(b) {
		if c := b[i]; c&0xe0 == 0xa0 {
			if j := i + 1 + int(c&0x1f); j <= len(b) {
				return b[i+1 : j], j, mpStr
			}
		}
	}
	return mpTextSlow(b, i)
}

func mpTextSlow(b []byte, i int) ([]byte, int, mpKind) {
	k, n, _, _, _, next := mpHead(b, i)
	if k == mpStr || k == mpBin {
		return b[next : next+n], next + n, k
	}
	return nil, next, k
}

// decodeMsgpack decodes the message b, whose first byte is a map or array.
func (d *Decoder) decodeMsgpack(b []byte) {
	k, n, _, _, _, i := mpHead(b, 0)
	var ok bool
	if k == mpMap {
		d.begin()
		if i, ok = d.mpPoint(b, i, n); !ok {
			d.mpBroken(b, i)
			return
		}
		d.finish(0)
	} else {
		if k != mpArray {
			d.mpBroken(b, i)
			return
		}
		for idx := 0; idx < n; idx++ {
			if idx == d.lim.MaxPoints {
				d.tooMany()
				return
			}
			ek, en, _, _, _, next := mpHead(b, i)
			if ek == mpMap {
				d.begin()
				if i, ok = d.mpPoint(b, next, en); !ok {
					d.mpBroken(b, i)
					return
				}
				d.finish(idx)
				continue
			}
			if i, ok = mpSkip(b, i); !ok {
				d.mpBroken(b, i)
				return
			}
			d.reject(idx, ReasonMalformed, "point is not a map")
		}
	}
	if i != len(b) {
		d.reject(-1, ReasonMalformed, fmt.Sprintf("unexpected data after the message at byte %d", i))
	}
}

// mpBroken reports the message as malformed at byte i.
func (d *Decoder) mpBroken(b []byte, i int) {
	if i >= len(b) {
		d.reject(-1, ReasonMalformed, "unexpected end of msgpack input")
		return
	}
	d.reject(-1, ReasonMalformed, fmt.Sprintf("invalid msgpack at byte %d", i))
}

// mpPoint reads the n pairs of a point map starting at b[i].
func (d *Decoder) mpPoint(b []byte, i, n int) (int, bool) {
	if n > (len(b)-i)/2 { // every pair takes at least two bytes
		return len(b), false
	}
	var ok bool
	for ; n > 0; n-- {
		var key []byte
		var next int
		k := mpStr
		if i >= len(b) {
			return i, false
		}
		if c := b[i]; c&0xe0 == 0xa0 && i+1+int(c&0x1f) <= len(b) { // fixstr, without a call
			next = i + 1 + int(c&0x1f)
			key = b[i+1 : next]
		} else {
			key, next, k = mpText(b, i)
		}
		if k != mpStr && k != mpBin {
			// A key of another type names no field we know: skip the pair.
			if i, ok = mpSkip(b, i); !ok {
				return i, false
			}
			if i, ok = mpSkip(b, i); !ok {
				return i, false
			}
			continue
		}
		i = next
		switch {
		case string(key) == "metric":
			i, ok = d.mpMetric(b, i)
		case string(key) == "labels":
			i, ok = d.mpLabels(b, i)
		case string(key) == "ts":
			i, ok = d.mpTS(b, i)
		case string(key) == "value":
			i, ok = d.mpValue(b, i)
		default:
			i, ok = mpSkip(b, i)
		}
		if !ok {
			return i, false
		}
	}
	return i, true
}

func (d *Decoder) mpMetric(b []byte, i int) (int, bool) {
	s, next, k := mpText(b, i)
	switch k {
	case mpStr, mpBin:
		d.setMetric(s)
		return next, true
	case mpBad:
		return next, false
	}
	d.fail(ReasonBadMetric, "metric is not a string")
	return mpSkip(b, i)
}

func (d *Decoder) mpLabels(b []byte, i int) (int, bool) {
	d.resetLabels()
	var n int
	if i < len(b) && b[i]&0xf0 == 0x80 { // fixmap
		n, i = int(b[i]&0x0f), i+1
	} else {
		k, hn, _, _, _, next := mpHead(b, i)
		switch k {
		case mpNil:
			return next, true
		case mpBad:
			return next, false
		case mpMap:
		default:
			d.fail(ReasonBadLabel, "labels is not a map")
			return mpSkip(b, i)
		}
		n, i = hn, next
	}
	if n > (len(b)-i)/2 {
		return len(b), false
	}
	var ok bool
	for ; n > 0; n-- {
		// Two short strings, the usual label, without a call.
		if i+1 < len(b) && b[i]&0xe0 == 0xa0 {
			nj := i + 1 + int(b[i]&0x1f)
			if nj < len(b) && b[nj]&0xe0 == 0xa0 {
				if vj := nj + 1 + int(b[nj]&0x1f); vj <= len(b) {
					d.addLabel(b[i+1:nj], b[nj+1:vj])
					i = vj
					continue
				}
			}
		}
		name, next, k := mpText(b, i)
		named := k == mpStr || k == mpBin
		switch {
		case named:
			i = next
		case k == mpBad:
			return next, false
		default:
			d.fail(ReasonBadLabel, "label name is not a string")
			if i, ok = mpSkip(b, i); !ok {
				return i, false
			}
		}
		value, next, k := mpText(b, i)
		switch {
		case k == mpStr || k == mpBin:
			if named {
				d.addLabel(name, value)
			}
			i = next
		case k == mpBad:
			return next, false
		default:
			d.fail(ReasonBadLabel, "label value is not a string")
			if i, ok = mpSkip(b, i); !ok {
				return i, false
			}
		}
	}
	return i, true
}

func (d *Decoder) mpTS(b []byte, i int) (int, bool) {
	if i+9 <= len(b) && (b[i] == 0xcf || b[i] == 0xd3) { // uint 64, int 64: the usual ms
		if u := binary.BigEndian.Uint64(b[i+1:]); u <= math.MaxInt64 || b[i] == 0xd3 {
			d.setTS(int64(u))
			return i + 9, true
		}
	}
	k, n, u, f, x, next := mpHead(b, i)
	switch k {
	case mpBad:
		return next, false
	case mpInt:
		d.setTS(int64(u))
	case mpUint:
		if u > math.MaxInt64 {
			d.fail(ReasonTSOutOfRange, "ts out of the int64 range")
		} else {
			d.setTS(int64(u))
		}
	case mpFloat:
		d.setTSFloat(f)
	case mpStr:
		if ms, ok := parseRFC3339(b[next : next+n]); ok {
			d.setTS(ms)
		} else {
			d.fail(ReasonBadTimestamp, "ts string is not an RFC 3339 time")
		}
		return next + n, true
	case mpExt:
		if x == mpTimestampExt {
			d.mpTime(b[next : next+n])
		} else {
			d.fail(ReasonBadTimestamp, "ts is an extension other than the timestamp")
		}
		return next + n, true
	default:
		d.fail(ReasonBadTimestamp, "ts is neither a number, a string nor a timestamp")
		return mpSkip(b, i)
	}
	return next, true
}

// mpTime decodes the payload of the msgpack timestamp extension in its
// three sizes: 32-bit seconds; 30-bit nanoseconds and 34-bit seconds; 32-bit
// nanoseconds and signed 64-bit seconds.
func (d *Decoder) mpTime(p []byte) {
	var sec int64
	var nsec uint32
	switch len(p) {
	case 4:
		sec = int64(binary.BigEndian.Uint32(p))
	case 8:
		v := binary.BigEndian.Uint64(p)
		nsec, sec = uint32(v>>34), int64(v&(1<<34-1))
	case 12:
		nsec, sec = binary.BigEndian.Uint32(p), int64(binary.BigEndian.Uint64(p[4:]))
	default:
		d.fail(ReasonBadTimestamp, "timestamp extension of a wrong length")
		return
	}
	switch {
	case nsec > 999999999:
		d.fail(ReasonBadTimestamp, "timestamp nanoseconds out of range")
	case sec > math.MaxInt64/1000-1 || sec < math.MinInt64/1000+1:
		d.fail(ReasonTSOutOfRange, "ts out of the int64 range")
	default:
		d.setTS(sec*1000 + int64(nsec/1e6))
	}
}

func (d *Decoder) mpValue(b []byte, i int) (int, bool) {
	if i+9 <= len(b) && b[i] == 0xcb { // float 64, the usual value
		d.setValue(math.Float64frombits(binary.BigEndian.Uint64(b[i+1:])))
		return i + 9, true
	}
	k, _, u, f, _, next := mpHead(b, i)
	switch k {
	case mpBad:
		return next, false
	case mpInt:
		d.setValue(float64(int64(u)))
	case mpUint:
		d.setValue(float64(u))
	case mpFloat:
		d.setValue(f)
	default:
		d.fail(ReasonBadValue, "value is not a number")
		return mpSkip(b, i)
	}
	return next, true
}
