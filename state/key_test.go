package state

import (
	"hash/fnv"
	"maps"
	"testing"
)

// ParseKey inverts AppendCanonical, also for values that need escaping or
// look like syntax.
func TestParseKeyRoundTrip(t *testing.T) {
	cases := []struct {
		name   string
		metric string
		labels map[string]string
	}{
		{"no labels", "up", nil},
		{"dotted metric", "disk.used.bytes", map[string]string{"host": "a.b.c"}},
		{"quote", "m", map[string]string{"v": `say "hi"`}},
		{"backslash", "m", map[string]string{"path": `C:\temp\`, "x": `\\`}},
		{"newline", "m", map[string]string{"msg": "two\nlines\n"}},
		{"escaped n is not a newline", "m", map[string]string{"v": `\n`}},
		{"unicode", "m", map[string]string{"city": "Zürich", "emoji": "😀", "cjk": "東京"}},
		{"subject wildcards", "m.*.>", map[string]string{"a": "*", "b": ">", "c": "x.*.>"}},
		{"syntax in values", "m", map[string]string{"a": `x="1",y="2"}`, "b": "{", "c": ",", "d": "="}},
		{"empty value", "m", map[string]string{"e": ""}},
		{"carriage return and tab", "m", map[string]string{"r": "a\r\tb"}},
		{"many labels unsorted", "m", map[string]string{"z": "1", "a": "2", "m": "3", "b_": "4", "B": "5"}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			var ls []Label
			for n, v := range c.labels {
				ls = append(ls, Label{Name: []byte(n), Value: []byte(v)})
			}
			text := AppendCanonical(nil, []byte(c.metric), ls)
			metric, labels, err := ParseKey(string(text))
			if err != nil {
				t.Fatalf("ParseKey(%q): %v", text, err)
			}
			if metric != c.metric || !maps.Equal(labels, c.labels) {
				t.Errorf("ParseKey(%q) = %q %q, want %q %q", text, metric, labels, c.metric, c.labels)
			}
			// The text does not depend on the order labels come in.
			for i, j := 0, len(ls)-1; i < j; i, j = i+1, j-1 {
				ls[i], ls[j] = ls[j], ls[i]
			}
			k := MakeKey(nil, []byte(c.metric), ls)
			if string(k.Text) != string(text) || k.Hash != Hash(text) {
				t.Errorf("MakeKey after reordering: %q, want %q", k.Text, text)
			}
		})
	}
}

func TestParseKeyMalformed(t *testing.T) {
	for _, text := range []string{`m{a="1"`, `m{a=1}`, `m{a="1}`, `m{a="1"b="2"}`, `m{a}`} {
		if _, _, err := ParseKey(text); err == nil {
			t.Errorf("ParseKey(%q) accepted", text)
		}
	}
}

// Hash is FNV-1a 64.
func TestHashVectors(t *testing.T) {
	for _, in := range []string{"", "a", "foobar", `cpu{host="a"}`, "東京"} {
		h := fnv.New64a() // standard library hash/fnv, FNV-1a 64
		h.Write([]byte(in))
		if got, want := Hash([]byte(in)), h.Sum64(); got != want {
			t.Errorf("Hash(%q) = %#x, want %#x", in, got, want)
		}
	}
	// FNV-1a 64 offset basis, published with the algorithm (from memory).
	if Hash(nil) != 0xcbf29ce484222325 {
		t.Errorf("Hash of nothing is not the offset basis")
	}
}
