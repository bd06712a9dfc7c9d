package state

import (
	"errors"
	"fmt"
	"sort"
)

// Label is one name/value pair of a series. The byte slices may alias a
// decoder's buffer; the store copies what it keeps.
type Label struct {
	Name, Value []byte
}

// Key identifies a series: its canonical text and the FNV-1a 64-bit hash of
// that text. Text may alias a caller's scratch buffer.
type Key struct {
	Hash uint64
	Text []byte
	// Check is a second 64-bit hash of Text, independent of Hash; MakeKey
	// fills it in. The store takes (Hash, Check) for the identity of a
	// series and only compares texts of keys whose Hash collides. Zero
	// means not computed: the store then computes it from Text.
	Check uint64
}

// MakeKey builds the key of metric with labels, appending the canonical text
// to dst[:0]. It sorts labels by name in place.
func MakeKey(dst []byte, metric []byte, labels []Label) Key {
	dst = AppendCanonical(dst[:0], metric, labels)
	h, c := hashes(dst)
	return Key{Hash: h, Text: dst, Check: c}
}

// AppendCanonical appends the canonical text of a series to dst: the metric
// name, then the labels sorted by name in the OpenMetrics text form
// name{a="x",b="y"}, with backslash, double quote and newline escaped as
// OpenMetrics does. A series without labels is just its metric name. It
// sorts labels in place.
func AppendCanonical(dst []byte, metric []byte, labels []Label) []byte {
	sortLabels(labels)
	dst = append(dst, metric...)
	if len(labels) == 0 {
		return dst
	}
	dst = append(dst, '{')
	for i, l := range labels {
		if i > 0 {
			dst = append(dst, ',')
		}
		dst = append(dst, l.Name...)
		dst = append(dst, '=', '"')
		for _, c := range l.Value {
			switch c {
			case '\\':
				dst = append(dst, '\\', '\\')
			case '"':
				dst = append(dst, '\\', '"')
			case '\n':
				dst = append(dst, '\\', 'n')
			default:
				dst = append(dst, c)
			}
		}
		dst = append(dst, '"')
	}
	return append(dst, '}')
}

// sortLabels sorts by name; insertion sort because label sets are small and
// usually already ordered, which makes this a single pass without allocation.
func sortLabels(ls []Label) {
	for i := 1; i < len(ls); i++ {
		for j := i; j > 0 && string(ls[j].Name) < string(ls[j-1].Name); j-- {
			ls[j], ls[j-1] = ls[j-1], ls[j]
		}
	}
}

const (
	fnvOffset = 14695981039346656037
	fnvPrime  = 1099511628211
)

// Hash is FNV-1a, 64 bit, over b. It is part of the wire contract: series
// tokens and partitions derive from it, so it must never change.
func Hash(b []byte) uint64 {
	h := uint64(fnvOffset)
	for _, c := range b {
		h ^= uint64(c)
		h *= fnvPrime
	}
	return h
}

// Partition maps a series hash to one of n partitions. It is stable across
// processes so that partitions can be split between them.
func Partition(hash uint64, n int) int {
	return int(hash % uint64(n))
}

// ParseKey splits canonical key text back into its metric and labels
// (values unescaped). It is the inverse of AppendCanonical.
func ParseKey(text string) (metric string, labels map[string]string, err error) {
	i := 0
	for i < len(text) && text[i] != '{' {
		i++
	}
	metric = text[:i]
	if i == len(text) {
		return metric, nil, nil
	}
	labels = make(map[string]string)
	if text[len(text)-1] != '}' {
		return "", nil, errors.New("state: key lacks closing brace")
	}
	s := text[i+1 : len(text)-1]
	for len(s) > 0 {
		eq := 0
		for eq < len(s) && s[eq] != '=' {
			eq++
		}
		if eq+1 >= len(s) || s[eq+1] != '"' {
			return "", nil, fmt.Errorf("state: malformed label in key %q", text)
		}
		name := s[:eq]
		s = s[eq+2:]
		var val []byte
		closed := false
		for j := 0; j < len(s); j++ {
			c := s[j]
			if c == '\\' && j+1 < len(s) {
				j++
				switch s[j] {
				case 'n':
					val = append(val, '\n')
				default:
					val = append(val, s[j])
				}
				continue
			}
			if c == '"' {
				labels[name] = string(val)
				s = s[j+1:]
				closed = true
				break
			}
			val = append(val, c)
		}
		if !closed {
			return "", nil, fmt.Errorf("state: unterminated label value in key %q", text)
		}
		if len(s) > 0 {
			if s[0] != ',' {
				return "", nil, fmt.Errorf("state: malformed key %q", text)
			}
			s = s[1:]
		}
	}
	return metric, labels, nil
}

// LabelNames returns the sorted names of a label map; a helper for callers
// that print or match labels deterministically.
func LabelNames(m map[string]string) []string {
	names := make([]string, 0, len(m))
	for k := range m {
		names = append(names, k)
	}
	sort.Strings(names)
	return names
}
