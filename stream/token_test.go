package stream

import (
	"hash/fnv"
	"math/rand/v2"
	"strings"
	"testing"

	"github.com/headroom-dev/headroom/state"
)

// wireKey builds the canonical key of metric with name/value pairs.
func wireKey(metric string, kv ...string) state.Key {
	var ls []state.Label
	for i := 0; i+1 < len(kv); i += 2 {
		ls = append(ls, state.Label{Name: []byte(kv[i]), Value: []byte(kv[i+1])})
	}
	return state.MakeKey(nil, []byte(metric), ls)
}

// TestTokenFixed pins tokens of fixed keys: they are our own wire contract,
// so a change here breaks subscribers.
func TestTokenFixed(t *testing.T) {
	cases := []struct {
		key  state.Key
		want string
	}{
		{wireKey("disk_used_bytes", "host", "db-1", "mount", "/data"), "disk_used_bytes_db-1__data-807016083979a9d0"},
		{wireKey("up"), "up-08c43a07b566d980"},
		{wireKey("http.requests", "route", "a>b", "path", "/api/v1/*"), "http_requests__api_v1___a_b-691adbeed8548d32"},
		{wireKey("temp", "site", "Zürich", "note", `say "hi"\n`), "temp_say__hi__n_Z__rich-4bb053dc6d6942fb"},
		{wireKey("m", "a", "", "b", ""), "m__-915fbba4cef55967"},
		{wireKey("a_very_long_metric_name_that_goes_on_and_on_and_on_and_on_beyond_limits", "x", "y"),
			"a_very_long_metric_name_that_goes_on_and_on_and_on_and_on_beyond-5ba68b6a87ba0837"},
		{wireKey("cpu", "zone", "eu-west-1a", "host", "web-7", "az", "1", "team", "platform-engineering-observability-core"),
			"cpu_1_web-7_platform-engineering-observability-core_eu-west-1a-8ea3527e1fe1ef26"},
		{wireKey("q", "v", "line\nbreak"), "q_line_break-57cbb04feb7bfed0"},
		{state.Key{}, "-0000000000000000"},
	}
	for _, c := range cases {
		if got := Token(c.key); got != c.want {
			t.Errorf("Token(%q) = %q, want %q", c.key.Text, got, c.want)
		}
		if got := string(AppendToken([]byte("x."), c.key)); got != "x."+c.want {
			t.Errorf("AppendToken(%q) = %q", c.key.Text, got)
		}
	}
}

// TestTokenHash checks that the hash in the token is FNV-1a 64 of the
// canonical text, as computed by hash/fnv (Go standard library).
func TestTokenHash(t *testing.T) {
	k := wireKey("disk_used_bytes", "host", "db-1", "mount", "/data")
	h := fnv.New64a()
	h.Write(k.Text)
	if k.Hash != h.Sum64() {
		t.Fatalf("key hash %x, hash/fnv %x", k.Hash, h.Sum64())
	}
	tok := Token(k)
	if want := "807016083979a9d0"; !strings.HasSuffix(tok, "-"+want) || k.Hash != 0x807016083979a9d0 {
		t.Fatalf("token %q, hash %x", tok, k.Hash)
	}
}

// wireTokenOK reports what is wrong with a token, or "".
func wireTokenOK(tok string, hash uint64) string {
	switch {
	case tok == "":
		return "empty"
	case len(tok) > 81:
		return "longer than 81 bytes"
	case !strings.HasSuffix(tok, "-"+wireHex(hash)):
		return "does not end in the hash"
	case len(tok)-17 > 64:
		return "readable part longer than 64 bytes"
	}
	for i := 0; i < len(tok); i++ {
		c := tok[i]
		if !(c >= 'a' && c <= 'z' || c >= 'A' && c <= 'Z' || c >= '0' && c <= '9' || c == '_' || c == '-') {
			return "holds a byte outside [A-Za-z0-9_-]"
		}
	}
	return ""
}

func wireHex(h uint64) string {
	const digits = "0123456789abcdef"
	var b [16]byte
	for i := 15; i >= 0; i-- {
		b[i] = digits[h&0xf]
		h >>= 4
	}
	return string(b[:])
}

// TestTokenProperties feeds random awkward keys: whatever the labels hold,
// the token is one valid subject token, and keys with different hashes get
// different tokens.
func TestTokenProperties(t *testing.T) {
	r := rand.New(rand.NewPCG(7, 8))
	pieces := []string{"", "a", "Z9", ".", " ", "*", ">", "\t", "\n", "\x00", "\x7f", "\"", "\\", "{", "}", "=", ",",
		"é", "日本", "😀", "\xff", "-", "_", strings.Repeat("x", 70), strings.Repeat(".", 100)}
	text := func() string {
		var sb strings.Builder
		for range r.IntN(5) {
			sb.WriteString(pieces[r.IntN(len(pieces))])
		}
		return sb.String()
	}
	seen := make(map[string]uint64)
	for range 20000 {
		kv := make([]string, 2*r.IntN(5))
		for i := range kv {
			kv[i] = text()
		}
		k := wireKey(text(), kv...)
		tok := Token(k)
		if why := wireTokenOK(tok, k.Hash); why != "" {
			t.Fatalf("token %q of %q %s", tok, k.Text, why)
		}
		if h, ok := seen[tok]; ok && h != k.Hash {
			t.Fatalf("token %q shared by hashes %x and %x", tok, h, k.Hash)
		}
		seen[tok] = k.Hash
	}
	// Arbitrary text that is not a canonical key must not break it either.
	for range 5000 {
		k := state.Key{Hash: r.Uint64(), Text: []byte(text() + text())}
		if why := wireTokenOK(Token(k), k.Hash); why != "" {
			t.Fatalf("token of %q %s", k.Text, why)
		}
	}
}
