package stream

import "github.com/headroom-dev/headroom/state"

// tokenReadable caps the readable part of a series token; with '-' and 16
// hex digits a token is at most 81 bytes.
const tokenReadable = 64

// Token returns a single NATS subject token naming the series k, whatever
// its labels hold. See AppendToken.
func Token(k state.Key) string {
	var buf [tokenReadable + 17]byte
	return string(AppendToken(buf[:0], k))
}

// AppendToken appends the series token of k to dst. The token is the
// metric followed by '_' and each label value in canonical order, with
// every byte outside [A-Za-z0-9_-] replaced by '_' and the whole cut at 64
// bytes, then '-' and the 16 lowercase hex digits of k.Hash. It depends only
// on the canonical key, so every process derives the same token, and the
// hash keeps tokens of different series apart where the readable part is
// shortened or flattened.
func AppendToken(dst []byte, k state.Key) []byte {
	t := k.Text
	n := 0 // readable bytes written
	i := 0
	for ; i < len(t) && t[i] != '{' && n < tokenReadable; i++ {
		dst = append(dst, tokenByte(t[i]))
		n++
	}
	for i < len(t) && t[i] != '{' {
		i++
	}
	// Labels: name="value" separated by ','. Names are skipped; each escape
	// pair in a value stands for one byte, which would become '_' anyway.
	for i++; i < len(t) && n < tokenReadable; {
		for i < len(t) && t[i] != '=' {
			i++
		}
		if i+1 >= len(t) || t[i+1] != '"' {
			break
		}
		dst = append(dst, '_')
		n++
		for i += 2; i < len(t) && t[i] != '"' && n < tokenReadable; i++ {
			c := t[i]
			if c == '\\' && i+1 < len(t) {
				c = '_'
				i++
			}
			dst = append(dst, tokenByte(c))
			n++
		}
		// Here the value ended at its closing quote, or the cap was hit.
		if i+1 >= len(t) || t[i+1] != ',' {
			break
		}
		i += 2
	}
	dst = append(dst, '-')
	const hex = "0123456789abcdef"
	for s := 60; s >= 0; s -= 4 {
		dst = append(dst, hex[k.Hash>>uint(s)&0xf])
	}
	return dst
}

// tokenByte keeps the bytes that are safe in a subject token everywhere.
func tokenByte(c byte) byte {
	if c >= 'a' && c <= 'z' || c >= 'A' && c <= 'Z' || c >= '0' && c <= '9' || c == '_' || c == '-' {
		return c
	}
	return '_'
}
