package stream

// TestFuzzBrief runs every fuzz target of this package on a few thousand
// mutated inputs on each plain `go test`. The fuzzing engine only mutates
// with -fuzz, one target at a time; without it `go test ./...` replays just
// the seed corpora in testdata/fuzz. A short, seeded, deterministic pass
// keeps each decoder exercised beyond its seeds in every run, so a
// robustness regression shows up in CI. Searching longer is still
// `go test -run XXX -fuzz=FuzzDecodeJSON ./stream/` (or FuzzDecodeMsgpack,
// FuzzToken).

import (
	"bytes"
	"errors"
	"fmt"
	"go/ast"
	"go/parser"
	"go/token"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"runtime/debug"
	"slices"
	"strconv"
	"strings"
	"testing"
)

// fuzzBriefSeed seeds the mutation streams; each target draws from its own
// PCG stream so that adding a target does not change the others' inputs.
const fuzzBriefSeed = 0x68656164726f6f6d

// fuzzCorpusHeader is the first line of a corpus file.
const fuzzCorpusHeader = "go test fuzz v1"

// fuzzBriefTarget is one fuzz target as TestFuzzBrief drives it.
type fuzzBriefTarget struct {
	name   string                  // the Fuzz function; its corpus is testdata/fuzz/<name>
	stream uint64                  // PCG stream of its mutations
	sig    []string                // argument types, as written in a corpus file
	seeds  func() [][]any          // its f.Add arguments
	run    func(*testing.T, []any) // its body
	json   bool                    // mutate JSON tokens as well as bytes
	dict   []string                // pieces worth inserting whole
}

func fuzzBriefTargets() []fuzzBriefTarget {
	return []fuzzBriefTarget{
		{
			name: "FuzzDecodeJSON", stream: 1, sig: []string{"[]byte"},
			seeds: func() [][]any { return fuzzBriefBytes(fuzzJSONSeeds()) },
			run:   func(t *testing.T, a []any) { fuzzJSONBody(t, a[0].([]byte)) },
			json:  true,
			dict: []string{
				`"metric"`, `"labels"`, `"ts"`, `"value"`, `"points"`,
				`1e308`, `-0`, `NaN`, `1e-400`, `9007199254740993`,
				`1717199990000`, `1.7171999900e12`, `-1.5E-3`, `"2024-05-31T23:59:50Z"`,
				`"m"`, `""`, `"\u0000"`, `"\ud83d\ude00"`, `"\udc00"`,
				`null`, `true`, `{}`, `[]`, `{"a":"b"}`,
			},
		},
		{
			name: "FuzzDecodeMsgpack", stream: 2, sig: []string{"[]byte"},
			seeds: func() [][]any { return fuzzBriefBytes(fuzzMsgpackSeeds()) },
			run:   func(t *testing.T, a []any) { fuzzMsgpackBody(t, a[0].([]byte)) },
			dict: []string{
				"\xa6metric", "\xa6labels", "\xa2ts", "\xa5value", "\xa6points", "\xa1m",
				"\xcf\x00\x00\x01\x8f\xd1\x18\x6c\xf0",         // uint 64: 1717199990000
				"\xcb\x40\x45\x40\x00\x00\x00\x00\x00",         // float 64: 42.5
				"\xca\x7f\xc0\x00\x00",                         // float 32: NaN
				"\xd6\xff\x66\x5a\x64\x76",                     // timestamp 32
				"\xd9\x02ts", "\xda\x00\x05value", "\xc4\x01m", // str 8, str 16, bin 8
				"\xc0", "\x80", "\x90", "\xdc\x00\x02", "\xde\x00\x01", "\xff",
			},
		},
		{
			name: "FuzzToken", stream: 3, sig: []string{"[]byte", "uint64"},
			seeds: func() (out [][]any) {
				for _, s := range fuzzTokenSeeds() {
					out = append(out, []any{s.text, s.hash})
				}
				return out
			},
			run:  func(t *testing.T, a []any) { fuzzTokenBody(t, a[0].([]byte), a[1].(uint64)) },
			dict: []string{"{", "}", `="`, `",`, `"}`, `\"`, `\\`, "=", ",", "é", "😀", "\xff", "\x00"},
		},
	}
}

// fuzzBriefBytes turns the seeds of a one-argument target into argument lists.
func fuzzBriefBytes(seeds [][]byte) [][]any {
	out := make([][]any, len(seeds))
	for i, s := range seeds {
		out[i] = []any{s}
	}
	return out
}

func TestFuzzBrief(t *testing.T) {
	n := 3000
	if testing.Short() {
		n = 300
	}
	for _, tg := range fuzzBriefTargets() {
		t.Run(tg.name, func(t *testing.T) {
			corpus := fuzzBriefCorpus(t, tg)
			m := &fuzzMutator{
				r:      rand.New(rand.NewPCG(fuzzBriefSeed, tg.stream)),
				json:   tg.json,
				dict:   tg.dict,
				corpus: corpus,
			}
			for it := range n {
				args := m.args(corpus[m.r.IntN(len(corpus))])
				if !fuzzBriefRun(t, tg, args, it) {
					return
				}
			}
		})
	}
}

// fuzzBriefRun runs the target's body on args and reports a failure or a
// panic with the input as a corpus file, ready to be added by hand.
func fuzzBriefRun(t *testing.T, tg fuzzBriefTarget, args []any, it int) (passed bool) {
	defer func() {
		if passed {
			return
		}
		// Either the body called t.Fatal (the goroutine is exiting) or it
		// panicked (recovered here; fail the test and stop it).
		p := recover()
		if p != nil {
			t.Errorf("panic: %v\n%s", p, debug.Stack())
		}
		t.Errorf("%s failed on mutated input %d (PCG seed %#x, stream %d); as testdata/fuzz/%s/<name>:\n%s",
			tg.name, it, uint64(fuzzBriefSeed), tg.stream, tg.name, fuzzCorpusText(args))
		if p != nil {
			t.FailNow()
		}
	}()
	tg.run(t, args)
	return !t.Failed()
}

// fuzzBriefCorpus loads the target's f.Add seeds and its committed corpus.
func fuzzBriefCorpus(t *testing.T, tg fuzzBriefTarget) [][]any {
	t.Helper()
	corpus := tg.seeds()
	dir := filepath.Join("testdata", "fuzz", tg.name)
	files, err := os.ReadDir(dir)
	if err != nil {
		t.Fatalf("reading the corpus of %s: %v", tg.name, err)
	}
	for _, f := range files {
		if f.IsDir() {
			continue
		}
		data, err := os.ReadFile(filepath.Join(dir, f.Name()))
		if err != nil {
			t.Fatal(err)
		}
		args, err := fuzzParseCorpus(data)
		if err != nil {
			t.Fatalf("%s: %v", filepath.Join(dir, f.Name()), err)
		}
		corpus = append(corpus, args)
	}
	for i, args := range corpus {
		var sig []string
		for _, a := range args {
			sig = append(sig, fuzzTypeName(a))
		}
		if !slices.Equal(sig, tg.sig) {
			t.Fatalf("corpus entry %d of %s has arguments %v, want %v", i, tg.name, sig, tg.sig)
		}
	}
	return corpus
}

// fuzzParseCorpus parses a corpus file in the `go test fuzz v1` format:
// the header line, then one Go conversion per argument. It knows the forms
// this package's targets take: []byte("..."), string("...") and uint64(N).
func fuzzParseCorpus(data []byte) ([]any, error) {
	lines := strings.Split(string(data), "\n")
	if strings.TrimSuffix(lines[0], "\r") != fuzzCorpusHeader {
		return nil, fmt.Errorf("first line %q is not %q", lines[0], fuzzCorpusHeader)
	}
	var args []any
	for _, line := range lines[1:] {
		line = strings.TrimSpace(line)
		if line == "" {
			continue
		}
		v, err := fuzzParseValue(line)
		if err != nil {
			return nil, fmt.Errorf("line %q: %w", fuzzShort(line), err)
		}
		args = append(args, v)
	}
	if len(args) == 0 {
		return nil, errors.New("no values after the header")
	}
	return args, nil
}

var errCorpusForm = errors.New("not one of []byte(\"...\"), string(\"...\"), uint64(N)")

func fuzzParseValue(line string) (any, error) {
	e, err := parser.ParseExpr(line)
	if err != nil {
		return nil, fmt.Errorf("%w: %w", errCorpusForm, err)
	}
	call, ok := e.(*ast.CallExpr)
	if !ok || len(call.Args) != 1 || call.Ellipsis.IsValid() {
		return nil, errCorpusForm
	}
	lit, ok := call.Args[0].(*ast.BasicLit)
	if !ok {
		return nil, errCorpusForm
	}
	typ := ""
	switch f := call.Fun.(type) {
	case *ast.Ident:
		typ = f.Name
	case *ast.ArrayType:
		if elt, ok := f.Elt.(*ast.Ident); ok && f.Len == nil && (elt.Name == "byte" || elt.Name == "uint8") {
			typ = "[]byte"
		}
	}
	switch {
	case (typ == "[]byte" || typ == "string") && lit.Kind == token.STRING:
		s, err := strconv.Unquote(lit.Value)
		if err != nil {
			return nil, fmt.Errorf("%w: %w", errCorpusForm, err)
		}
		if typ == "string" {
			return s, nil
		}
		return []byte(s), nil
	case typ == "uint64" && lit.Kind == token.INT:
		u, err := strconv.ParseUint(lit.Value, 0, 64)
		if err != nil {
			return nil, fmt.Errorf("%w: %w", errCorpusForm, err)
		}
		return u, nil
	}
	return nil, errCorpusForm
}

// fuzzTypeName names the type of a as a corpus file writes it.
func fuzzTypeName(a any) string {
	if _, ok := a.([]byte); ok {
		return "[]byte" // %T says []uint8
	}
	return fmt.Sprintf("%T", a)
}

// fuzzCorpusText writes args as a corpus file, as the fuzzing engine does.
func fuzzCorpusText(args []any) string {
	var b strings.Builder
	b.WriteString(fuzzCorpusHeader + "\n")
	for _, a := range args {
		switch v := a.(type) {
		case []byte:
			fmt.Fprintf(&b, "[]byte(%q)\n", v)
		case string:
			fmt.Fprintf(&b, "string(%q)\n", v)
		default:
			fmt.Fprintf(&b, "%T(%v)\n", v, v)
		}
	}
	return b.String()
}

func fuzzShort(s string) string {
	if len(s) > 60 {
		return s[:60] + "..."
	}
	return s
}

// TestFuzzParseCorpus checks the corpus reader on the forms it accepts and
// refuses, and that what fuzzCorpusText prints reads back the same.
func TestFuzzParseCorpus(t *testing.T) {
	cases := []struct {
		name string
		file string
		want []any // nil: must fail
	}{
		{"bytes", "go test fuzz v1\n[]byte(\"a\\x00\\xff\\\"\")\n", []any{[]byte("a\x00\xff\"")}},
		{"bytes and uint64", "go test fuzz v1\n[]byte(\"\")\nuint64(18446744073709551615)\n", []any{[]byte{}, uint64(math.MaxUint64)}},
		{"string, raw literal, CRLF", "go test fuzz v1\r\nstring(`x\\y`)\r\n\r\n", []any{"x\\y"}},
		{"uint8 slice and hex", "go test fuzz v1\n[]uint8(\"z\")\nuint64(0x10)\n", []any{[]byte("z"), uint64(16)}},
		{"no header", "[]byte(\"a\")\n", nil},
		{"other version", "go test fuzz v2\n[]byte(\"a\")\n", nil},
		{"no value", "go test fuzz v1\n\n", nil},
		{"int", "go test fuzz v1\nint(3)\n", nil},
		{"negative", "go test fuzz v1\nuint64(-1)\n", nil},
		{"byte array", "go test fuzz v1\n[4]byte(\"abcd\")\n", nil},
		{"bad quote", "go test fuzz v1\n[]byte(\"a\\q\")\n", nil},
		{"two args", "go test fuzz v1\n[]byte(\"a\", \"b\")\n", nil},
		{"float", "go test fuzz v1\nfloat64(1.5)\n", nil},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			got, err := fuzzParseCorpus([]byte(c.file))
			if c.want == nil {
				if err == nil {
					t.Fatalf("parsed as %#v, want an error", got)
				}
				return
			}
			if err != nil {
				t.Fatal(err)
			}
			if fmt.Sprintf("%#v", got) != fmt.Sprintf("%#v", c.want) {
				t.Fatalf("got %#v, want %#v", got, c.want)
			}
			back, err := fuzzParseCorpus([]byte(fuzzCorpusText(got)))
			if err != nil || fmt.Sprintf("%#v", back) != fmt.Sprintf("%#v", got) {
				t.Fatalf("round trip gave %#v, %v", back, err)
			}
		})
	}
}

// fuzzMutator derives inputs from corpus entries in the manner of a
// coverage-blind fuzzer: a few random edits, each chosen from the kinds
// that most often break decoders.
type fuzzMutator struct {
	r      *rand.Rand
	json   bool
	dict   []string
	corpus [][]any
}

// args returns a mutated copy of a corpus entry. A []byte argument gets
// one to four edits, one in half the cases, so that most inputs stay close
// enough to their seed to reach deep into the decoder; of two arguments,
// either or both are changed.
func (m *fuzzMutator) args(base []any) []any {
	out := slices.Clone(base)
	which := m.r.IntN(4) // with two arguments: 0, 1 the first, 2 the second, 3 both
	for i, a := range out {
		if len(out) > 1 && (i == 0 && which == 2 || i == 1 && which < 2) {
			continue
		}
		switch v := a.(type) {
		case []byte:
			b := m.bytes(slices.Clone(v))
			for n := 1; n < 4 && m.r.IntN(2) == 0; n++ { // more edits, more rarely
				b = m.bytes(b)
			}
			out[i] = b
		case uint64:
			out[i] = m.uint64(v)
		}
	}
	return out
}

func (m *fuzzMutator) bytes(b []byte) []byte {
	r := m.r
	switch r.IntN(9) {
	case 0: // flip a bit
		if len(b) > 0 {
			b[r.IntN(len(b))] ^= 1 << r.IntN(8)
		}
	case 1: // set a byte to an interesting value
		if len(b) > 0 {
			b[r.IntN(len(b))] = m.interesting()
		}
	case 2: // insert a run of interesting or random bytes
		run := make([]byte, 1+r.IntN(8))
		for i := range run {
			if r.IntN(2) == 0 {
				run[i] = m.interesting()
			} else {
				run[i] = byte(r.Uint32())
			}
		}
		b = slices.Insert(b, r.IntN(len(b)+1), run...)
	case 3: // delete a run
		if len(b) > 0 {
			i := r.IntN(len(b))
			b = slices.Delete(b, i, i+1+r.IntN(min(16, len(b)-i)))
		}
	case 4: // duplicate a run elsewhere
		if len(b) > 0 {
			i := r.IntN(len(b))
			run := slices.Clone(b[i : i+1+r.IntN(min(64, len(b)-i))])
			b = slices.Insert(b, r.IntN(len(b)+1), run...)
		}
	case 5: // splice: the head of this input, the tail of another entry
		other := m.corpus[r.IntN(len(m.corpus))][0].([]byte)
		b = append(b[:r.IntN(len(b)+1)], other[r.IntN(len(other)+1):]...)
	case 6: // truncate
		b = b[:r.IntN(len(b)+1)]
	default: // a dictionary piece: a swapped JSON token, or inserted whole
		piece := m.dict[r.IntN(len(m.dict))]
		if m.json && r.IntN(4) != 0 {
			if spans := fuzzJSONTokens(b); len(spans) > 0 {
				s := spans[r.IntN(len(spans))]
				return slices.Concat(b[:s[0]], []byte(piece), b[s[1]:])
			}
		}
		i := r.IntN(len(b) + 1)
		if r.IntN(2) == 0 { // overwrite rather than insert
			return slices.Concat(b[:i], []byte(piece), b[min(len(b), i+len(piece)):])
		}
		b = slices.Insert(b, i, []byte(piece)...)
	}
	return b
}

// interesting returns a byte that means something to one of the decoders:
// JSON structure and escapes, the edges of a byte, or a msgpack type byte.
func (m *fuzzMutator) interesting() byte {
	switch m.r.IntN(8) {
	case 0:
		return 0xc0 + byte(m.r.IntN(0x20)) // nil through map 32
	case 1:
		return 0x90 + byte(m.r.IntN(0x10)) // fixarray
	case 2:
		return 0x80 + byte(m.r.IntN(0x10)) // fixmap
	case 3:
		return 0xa0 + byte(m.r.IntN(0x20)) // fixstr
	}
	const edges = "\x00\xff\x7f\x80\"\\{}[],:"
	return edges[m.r.IntN(len(edges))]
}

func (m *fuzzMutator) uint64(u uint64) uint64 {
	switch m.r.IntN(4) {
	case 0:
		return u ^ 1<<m.r.IntN(64)
	case 1:
		edges := []uint64{0, 1, 0xf, 0x10, 1 << 63, math.MaxInt64, math.MaxUint64}
		return edges[m.r.IntN(len(edges))]
	case 2:
		return u + uint64(m.r.IntN(33)) - 16
	}
	return m.r.Uint64()
}

// fuzzJSONTokens returns the spans of the strings, numbers and bare words
// of b, found loosely since b need not be valid.
func fuzzJSONTokens(b []byte) [][2]int {
	var spans [][2]int
	word := func(c byte) bool { return c >= 'a' && c <= 'z' || c >= 'A' && c <= 'Z' }
	for i := 0; i < len(b); {
		c, j := b[i], i+1
		switch {
		case c == '"':
			for j < len(b) && b[j] != '"' {
				if b[j] == '\\' {
					j++
				}
				j++
			}
			j = min(j+1, len(b))
		case c == '-' || c >= '0' && c <= '9':
			for j < len(b) && bytes.IndexByte([]byte("0123456789.eE+-"), b[j]) >= 0 {
				j++
			}
		case word(c):
			for j < len(b) && word(b[j]) {
				j++
			}
		default:
			i++
			continue
		}
		spans = append(spans, [2]int{i, j})
		i = j
	}
	return spans
}
