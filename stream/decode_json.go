package stream

import (
	"fmt"
	"math"
	"strconv"
	"unicode/utf16"
	"unicode/utf8"
)

// The JSON side is a hand-written scanner over the message (RFC 8259): it
// reads the four known fields in place and checks the syntax of whatever
// else it skips, without reflection and, for strings without escapes,
// without copying.

// jsonMaxDepth bounds the nesting of skipped values; deeper input is
// refused rather than tracked without limit.
const jsonMaxDepth = 1024

// decodeJSON decodes the message b whose value starts at b[i].
func (d *Decoder) decodeJSON(b []byte, i int) {
	var ok bool
	if b[i] == '{' {
		d.begin()
		if i, ok = d.jsonPoint(b, i); !ok {
			d.jsonBroken(b, i)
			return
		}
		d.finish(0)
	} else if i, ok = d.jsonArray(b, i); !ok {
		if i >= 0 {
			d.jsonBroken(b, i)
		}
		return
	}
	if i = jsonSpace(b, i); i != len(b) {
		d.reject(-1, ReasonMalformed, fmt.Sprintf("unexpected data after the message at byte %d", i))
	}
}

// jsonArray decodes an array of points at b[i]. It returns ok false and a
// negative position when it has already reported why it stopped.
func (d *Decoder) jsonArray(b []byte, i int) (int, bool) {
	i = jsonSpace(b, i+1)
	if i < len(b) && b[i] == ']' {
		return i + 1, true
	}
	for idx := 0; ; idx++ {
		if i >= len(b) {
			return i, false
		}
		if idx == d.lim.MaxPoints {
			d.tooMany()
			return -1, false
		}
		var ok bool
		if b[i] == '{' {
			d.begin()
			if i, ok = d.jsonPoint(b, i); !ok {
				return i, false
			}
			d.finish(idx)
		} else {
			if i, ok = d.jsonSkip(b, i); !ok {
				return i, false
			}
			d.reject(idx, ReasonMalformed, "point is not an object")
		}
		i = jsonSpace(b, i)
		if i >= len(b) {
			return i, false
		}
		switch b[i] {
		case ',':
			i = jsonSpace(b, i+1)
		case ']':
			return i + 1, true
		default:
			return i, false
		}
	}
}

// jsonBroken reports the message as malformed at byte i.
func (d *Decoder) jsonBroken(b []byte, i int) {
	if i >= len(b) {
		d.reject(-1, ReasonMalformed, "unexpected end of JSON input")
		return
	}
	d.reject(-1, ReasonMalformed, fmt.Sprintf("invalid JSON at byte %d", i))
}

// jsonPoint reads the object at b[i] into the draft point.
func (d *Decoder) jsonPoint(b []byte, i int) (int, bool) {
	i = jsonSpace(b, i+1)
	if i < len(b) && b[i] == '}' {
		return i + 1, true
	}
	for {
		if i >= len(b) || b[i] != '"' {
			return i, false
		}
		key, j, ok := d.jsonString(b, i)
		if !ok {
			return j, false
		}
		if i = jsonSpace(b, j); i >= len(b) || b[i] != ':' {
			return i, false
		}
		if i = jsonSpace(b, i+1); i >= len(b) {
			return i, false
		}
		switch string(key) {
		case "metric":
			i, ok = d.jsonMetric(b, i)
		case "labels":
			i, ok = d.jsonLabels(b, i)
		case "ts":
			i, ok = d.jsonTS(b, i)
		case "value":
			i, ok = d.jsonValue(b, i)
		default:
			i, ok = d.jsonSkip(b, i)
		}
		if !ok {
			return i, false
		}
		if i = jsonSpace(b, i); i >= len(b) {
			return i, false
		}
		switch b[i] {
		case ',':
			i = jsonSpace(b, i+1)
		case '}':
			return i + 1, true
		default:
			return i, false
		}
	}
}

func (d *Decoder) jsonMetric(b []byte, i int) (int, bool) {
	if b[i] != '"' {
		d.fail(ReasonBadMetric, "metric is not a string")
		return d.jsonSkip(b, i)
	}
	s, i, ok := d.jsonString(b, i)
	if ok {
		d.setMetric(s)
	}
	return i, ok
}

func (d *Decoder) jsonLabels(b []byte, i int) (int, bool) {
	d.resetLabels()
	if b[i] == 'n' {
		return jsonLiteral(b, i, "null")
	}
	if b[i] != '{' {
		d.fail(ReasonBadLabel, "labels is not an object")
		return d.jsonSkip(b, i)
	}
	i = jsonSpace(b, i+1)
	if i < len(b) && b[i] == '}' {
		return i + 1, true
	}
	for {
		if i >= len(b) || b[i] != '"' {
			return i, false
		}
		name, j, ok := d.jsonString(b, i)
		if !ok {
			return j, false
		}
		if i = jsonSpace(b, j); i >= len(b) || b[i] != ':' {
			return i, false
		}
		if i = jsonSpace(b, i+1); i >= len(b) {
			return i, false
		}
		if b[i] == '"' {
			var value []byte
			if value, i, ok = d.jsonString(b, i); !ok {
				return i, false
			}
			d.addLabel(name, value)
		} else {
			d.fail(ReasonBadLabel, "label value is not a string")
			if i, ok = d.jsonSkip(b, i); !ok {
				return i, false
			}
		}
		if i = jsonSpace(b, i); i >= len(b) {
			return i, false
		}
		switch b[i] {
		case ',':
			i = jsonSpace(b, i+1)
		case '}':
			return i + 1, true
		default:
			return i, false
		}
	}
}

func (d *Decoder) jsonTS(b []byte, i int) (int, bool) {
	switch c := b[i]; {
	case c == '"':
		s, j, ok := d.jsonString(b, i)
		if !ok {
			return j, false
		}
		if ms, good := parseRFC3339(s); good {
			d.setTS(ms)
		} else {
			d.fail(ReasonBadTimestamp, "ts string is not an RFC 3339 time")
		}
		return j, true
	case c == '-' || c >= '0' && c <= '9':
		end, integer, ok := jsonNumber(b, i)
		if !ok {
			return end, false
		}
		if !integer {
			f, ok := parseJSONFloat(b[i:end])
			if !ok {
				d.fail(ReasonTSOutOfRange, "ts out of the int64 range")
				return end, true
			}
			d.setTSFloat(f)
			return end, true
		}
		if ms, ok := parseJSONInt(b[i:end]); ok {
			d.setTS(ms)
		} else {
			d.fail(ReasonTSOutOfRange, "ts out of the int64 range")
		}
		return end, true
	}
	d.fail(ReasonBadTimestamp, "ts is neither a number nor a string")
	return d.jsonSkip(b, i)
}

func (d *Decoder) jsonValue(b []byte, i int) (int, bool) {
	if c := b[i]; c != '-' && (c < '0' || c > '9') {
		d.fail(ReasonBadValue, "value is not a number")
		return d.jsonSkip(b, i)
	}
	end, _, ok := jsonNumber(b, i)
	if !ok {
		return end, false
	}
	if f, ok := parseJSONFloat(b[i:end]); ok {
		d.setValue(f)
	} else {
		d.fail(ReasonBadValue, "value out of the float64 range")
	}
	return end, true
}

// jsonSpace skips JSON whitespace from b[i].
func jsonSpace(b []byte, i int) int {
	for i < len(b) {
		switch b[i] {
		case ' ', '\t', '\n', '\r':
			i++
		default:
			return i
		}
	}
	return i
}

// jsonLiteral checks that the literal lit is at b[i].
func jsonLiteral(b []byte, i int, lit string) (int, bool) {
	if len(b)-i < len(lit) || string(b[i:i+len(lit)]) != lit {
		return i, false
	}
	return i + len(lit), true
}

// jsonNumber checks the number at b[i] and returns where it ends and
// whether it is written as an integer (no fraction, no exponent).
func jsonNumber(b []byte, i int) (end int, integer, ok bool) {
	if i < len(b) && b[i] == '-' {
		i++
	}
	switch {
	case i >= len(b):
		return i, false, false
	case b[i] == '0':
		i++
	case b[i] >= '1' && b[i] <= '9':
		i = jsonDigits(b, i+1)
	default:
		return i, false, false
	}
	integer = true
	if i < len(b) && b[i] == '.' {
		j := jsonDigits(b, i+1)
		if j == i+1 {
			return j, false, false
		}
		i, integer = j, false
	}
	if i < len(b) && (b[i] == 'e' || b[i] == 'E') {
		i++
		if i < len(b) && (b[i] == '+' || b[i] == '-') {
			i++
		}
		j := jsonDigits(b, i)
		if j == i {
			return j, false, false
		}
		i, integer = j, false
	}
	return i, integer, true
}

func jsonDigits(b []byte, i int) int {
	for i < len(b) && b[i] >= '0' && b[i] <= '9' {
		i++
	}
	return i
}

// parseJSONInt converts a checked integer literal, failing on overflow.
func parseJSONInt(b []byte) (int64, bool) {
	neg := b[0] == '-'
	if neg {
		b = b[1:]
	}
	var u uint64
	for _, c := range b {
		if u > (1<<63)/10 {
			return 0, false
		}
		u = u*10 + uint64(c-'0')
		if u > 1<<63 {
			return 0, false
		}
	}
	if neg {
		return -int64(u), true // -(1<<63) wraps to itself, which is right
	}
	if u == 1<<63 {
		return 0, false
	}
	return int64(u), true
}

// parseJSONFloat converts a checked number literal. Short literals take
// Clinger's exact fast path (a mantissa below 2^53 times an exact power of
// ten is correctly rounded by one IEEE operation); the rest go to strconv.
// It fails when the number is beyond the float64 range.
func parseJSONFloat(b []byte) (float64, bool) {
	neg := b[0] == '-'
	i := 0
	if neg {
		i++
	}
	var mant uint64
	var exp, nd int
	for ; i < len(b) && b[i] >= '0' && b[i] <= '9'; i++ {
		mant = mant*10 + uint64(b[i]-'0')
		nd++
	}
	if i < len(b) && b[i] == '.' {
		for i++; i < len(b) && b[i] >= '0' && b[i] <= '9'; i++ {
			mant = mant*10 + uint64(b[i]-'0')
			nd++
			exp--
		}
	}
	if i == len(b) && nd <= 15 { // 15 digits stay below 2^53
		f := float64(mant)
		switch {
		case exp == 0:
		case exp >= -22:
			f /= math.Pow10(-exp) // exact for 10^0..10^22
		default:
			return jsonSlowFloat(b)
		}
		if neg {
			f = -f
		}
		return f, true
	}
	return jsonSlowFloat(b)
}

func jsonSlowFloat(b []byte) (float64, bool) {
	f, err := strconv.ParseFloat(string(b), 64)
	return f, err == nil
}

// jsonString reads the string at b[i] (which is '"'). Without escapes the
// result aliases b; with escapes it is decoded into the decoder's string
// scratch, which lives until the next point.
func (d *Decoder) jsonString(b []byte, i int) ([]byte, int, bool) {
	start := i + 1
	for j := start; j < len(b); j++ {
		switch c := b[j]; {
		case c == '"':
			return b[start:j], j + 1, true
		case c == '\\':
			return d.jsonUnescape(b, start, j)
		case c < 0x20:
			return nil, j, false
		}
	}
	return nil, len(b), false
}

// jsonUnescape decodes the string that starts at b[start] and whose first
// escape is at b[j].
func (d *Decoder) jsonUnescape(b []byte, start, j int) ([]byte, int, bool) {
	from := len(d.str)
	d.str = append(d.str, b[start:j]...)
	for j < len(b) {
		c := b[j]
		switch {
		case c == '"':
			return d.str[from:], j + 1, true
		case c < 0x20:
			return nil, j, false
		case c != '\\':
			d.str = append(d.str, c)
			j++
			continue
		}
		if j+1 >= len(b) {
			return nil, len(b), false
		}
		switch e := b[j+1]; e {
		case '"', '\\', '/':
			d.str = append(d.str, e)
		case 'b':
			d.str = append(d.str, '\b')
		case 'f':
			d.str = append(d.str, '\f')
		case 'n':
			d.str = append(d.str, '\n')
		case 'r':
			d.str = append(d.str, '\r')
		case 't':
			d.str = append(d.str, '\t')
		case 'u':
			r, ok := jsonHex4(b, j+2)
			if !ok {
				return nil, j, false
			}
			j += 4
			if utf16.IsSurrogate(r) {
				// A valid pair makes one rune; a lone half becomes U+FFFD.
				r2, ok := jsonHex4(b, j+4)
				if ok && j+3 < len(b) && b[j+2] == '\\' && b[j+3] == 'u' {
					if dec := utf16.DecodeRune(r, r2); dec != utf8.RuneError {
						r = dec
						j += 6
					} else {
						r = utf8.RuneError
					}
				} else {
					r = utf8.RuneError
				}
			}
			d.str = utf8.AppendRune(d.str, r)
		default:
			return nil, j, false
		}
		j += 2
	}
	return nil, len(b), false
}

// jsonHex4 reads four hex digits at b[i].
func jsonHex4(b []byte, i int) (rune, bool) {
	if i < 0 || len(b)-i < 4 {
		return 0, false
	}
	var r rune
	for _, c := range b[i : i+4] {
		switch {
		case c >= '0' && c <= '9':
			c -= '0'
		case c >= 'a' && c <= 'f':
			c -= 'a' - 10
		case c >= 'A' && c <= 'F':
			c -= 'A' - 10
		default:
			return 0, false
		}
		r = r<<4 | rune(c)
	}
	return r, true
}

// jsonSkip checks and skips the value at b[i], iteratively so that hostile
// nesting cannot exhaust the stack.
func (d *Decoder) jsonSkip(b []byte, i int) (int, bool) {
	depth := 0
	for {
		// A value starts at b[i].
		if i >= len(b) {
			return i, false
		}
		var ok bool
		switch c := b[i]; {
		case c == '"':
			if i, ok = jsonStringEnd(b, i); !ok {
				return i, false
			}
		case c == '{' || c == '[':
			if depth == jsonMaxDepth {
				return i, false
			}
			d.setNest(depth, c == '{')
			depth++
			i = jsonSpace(b, i+1)
			if i < len(b) && (c == '{' && b[i] == '}' || c == '[' && b[i] == ']') {
				i++
				depth--
				break
			}
			if c == '{' {
				if i, ok = jsonKey(b, i); !ok {
					return i, false
				}
			}
			continue
		case c == '-' || c >= '0' && c <= '9':
			if i, _, ok = jsonNumber(b, i); !ok {
				return i, false
			}
		case c == 't':
			if i, ok = jsonLiteral(b, i, "true"); !ok {
				return i, false
			}
		case c == 'f':
			if i, ok = jsonLiteral(b, i, "false"); !ok {
				return i, false
			}
		case c == 'n':
			if i, ok = jsonLiteral(b, i, "null"); !ok {
				return i, false
			}
		default:
			return i, false
		}
		// A value ended before b[i]: close containers or move to the next
		// element.
		for {
			if depth == 0 {
				return i, true
			}
			if i = jsonSpace(b, i); i >= len(b) {
				return i, false
			}
			object := d.nested(depth - 1)
			if b[i] == ',' {
				i = jsonSpace(b, i+1)
				if object {
					if i, ok = jsonKey(b, i); !ok {
						return i, false
					}
				}
				break
			}
			if object && b[i] == '}' || !object && b[i] == ']' {
				i++
				depth--
				continue
			}
			return i, false
		}
	}
}

// jsonKey checks `"name" :` at b[i] and returns where the value starts.
func jsonKey(b []byte, i int) (int, bool) {
	if i >= len(b) || b[i] != '"' {
		return i, false
	}
	i, ok := jsonStringEnd(b, i)
	if !ok {
		return i, false
	}
	if i = jsonSpace(b, i); i >= len(b) || b[i] != ':' {
		return i, false
	}
	return jsonSpace(b, i+1), true
}

// jsonStringEnd checks the string at b[i] and returns where it ends.
func jsonStringEnd(b []byte, i int) (int, bool) {
	for i++; i < len(b); i++ {
		switch c := b[i]; {
		case c == '"':
			return i + 1, true
		case c < 0x20:
			return i, false
		case c == '\\':
			if i+1 >= len(b) {
				return len(b), false
			}
			switch b[i+1] {
			case '"', '\\', '/', 'b', 'f', 'n', 'r', 't':
				i++
			case 'u':
				if _, ok := jsonHex4(b, i+2); !ok {
					return i, false
				}
				i += 5
			default:
				return i, false
			}
		}
	}
	return len(b), false
}

// setNest records whether the container at depth is an object.
func (d *Decoder) setNest(depth int, object bool) {
	w, bit := depth/64, uint64(1)<<(depth%64)
	if object {
		d.nest[w] |= bit
	} else {
		d.nest[w] &^= bit
	}
}

func (d *Decoder) nested(depth int) bool {
	return d.nest[depth/64]&(1<<(depth%64)) != 0
}
