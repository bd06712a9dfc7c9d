package stream

import (
	"encoding/json"
	"testing"

	"github.com/headroom-dev/headroom/state"
)

// wireKnownReason reports whether r is one of the Reason constants.
func wireKnownReason(r string) bool {
	switch r {
	case ReasonMalformed, ReasonOversize, ReasonTooManyPoints, ReasonBadMetric, ReasonBadLabel,
		ReasonTooManyLabels, ReasonBadValue, ReasonNonFinite, ReasonBadTimestamp, ReasonTSOutOfRange:
		return true
	}
	return false
}

// wireFuzzDecode decodes data and checks the invariants every input must
// keep: no panic, every delivered point valid, the count right, the
// rejections well formed. It returns the reason the message as a whole was
// rejected for, if it was.
func wireFuzzDecode(t *testing.T, data []byte) (whole string) {
	lim := Limits{MaxLabels: 4, MaxName: 16, MaxValue: 32, MaxPoints: 64}
	d := NewDecoder(lim, wireClock)
	oks, lastIndex := 0, -1
	n := d.Decode(data, func(p *Point) {
		oks++
		wireCheckPoint(t, p, lim, wireClock())
	}, func(r Reject) {
		if !wireKnownReason(r.Reason) || r.Detail == "" || r.Index < -1 {
			t.Fatalf("bad reject %+v", r)
		}
		if r.Index == -1 {
			if whole != "" {
				t.Fatalf("two whole-message rejects")
			}
			whole = r.Reason
		} else {
			if r.Index <= lastIndex {
				t.Fatalf("reject index %d after %d", r.Index, lastIndex)
			}
			lastIndex = r.Index
		}
	})
	if n != oks {
		t.Fatalf("Decode returned %d, delivered %d", n, oks)
	}
	// The same decoder must still work after any input.
	good := []byte(`{"metric":"m","ts":1717199990000,"value":1}`)
	if d.Decode(good, nil, nil) != 1 {
		t.Fatal("decoder broken by the previous input")
	}
	return whole
}

// The seeds and bodies of the fuzz targets are named functions so that
// TestFuzzBrief can run the same bodies on mutated inputs.

func fuzzJSONSeeds() [][]byte {
	return [][]byte{
		[]byte(`{"metric":"disk_used_bytes","labels":{"host":"db-1"},"ts":1717199990000,"value":42.5}`),
	}
}

func FuzzDecodeJSON(f *testing.F) {
	for _, s := range fuzzJSONSeeds() {
		f.Add(s)
	}
	f.Fuzz(fuzzJSONBody)
}

func fuzzJSONBody(t *testing.T, data []byte) {
	whole := wireFuzzDecode(t, data)
	// encoding/json (Go standard library) is the syntax oracle for
	// messages that look like JSON and were not cut short by a limit.
	i := jsonSpace(data, 0)
	if i == len(data) || data[i] != '{' && data[i] != '[' || whole == ReasonTooManyPoints || whole == ReasonOversize {
		return
	}
	depth, maxDepth := 0, 0
	for _, c := range data { // brackets inside strings count too: it only errs on the safe side
		switch c {
		case '[', '{':
			depth++
			maxDepth = max(maxDepth, depth)
		case ']', '}':
			depth--
		}
	}
	if maxDepth > jsonMaxDepth {
		return
	}
	if valid, malformed := json.Valid(data), whole == ReasonMalformed; valid == malformed {
		t.Fatalf("encoding/json valid=%v, decoder malformed=%v", valid, malformed)
	}
}

func fuzzMsgpackSeeds() [][]byte {
	return [][]byte{
		{0x81, 0xa6, 'm', 'e', 't', 'r', 'i', 'c', 0xa1, 'm'},
	}
}

func FuzzDecodeMsgpack(f *testing.F) {
	for _, s := range fuzzMsgpackSeeds() {
		f.Add(s)
	}
	f.Fuzz(fuzzMsgpackBody)
}

func fuzzMsgpackBody(t *testing.T, data []byte) {
	wireFuzzDecode(t, data)
}

// fuzzTokenSeed is the argument list of one FuzzToken seed.
type fuzzTokenSeed struct {
	text []byte
	hash uint64
}

func fuzzTokenSeeds() []fuzzTokenSeed {
	return []fuzzTokenSeed{
		{[]byte(`disk_used_bytes{host="db-1",mount="/data"}`), 0x807016083979a9d0},
	}
}

func FuzzToken(f *testing.F) {
	for _, s := range fuzzTokenSeeds() {
		f.Add(s.text, s.hash)
	}
	f.Fuzz(fuzzTokenBody)
}

func fuzzTokenBody(t *testing.T, text []byte, hash uint64) {
	k := state.Key{Hash: hash, Text: text}
	tok := Token(k)
	if why := wireTokenOK(tok, hash); why != "" {
		t.Fatalf("token %q of %q %s", tok, text, why)
	}
	// Tokens of real keys: the text as metric and as a label value.
	real := wireKey("m", "v", string(text))
	if why := wireTokenOK(Token(real), real.Hash); why != "" {
		t.Fatalf("token of %q %s", real.Text, why)
	}
}
