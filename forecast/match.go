package forecast

import (
	"fmt"
	"strings"
)

// Matcher selects series by metric name and labels. The zero Matcher
// matches every series.
//
// The selector syntax is a comma-separated list of terms, all of which must
// hold:
//
//	disk_used_ratio,mount=/data*,host!=test-?
//
// An optional first bare term is the metric name; it may also be written
// as metric=NAME (so a label called "metric" cannot be selected). Other
// terms are name=value or name!=value. Values may use the globs '*' (any
// run of characters) and '?' (one character), and may be double-quoted to
// contain commas, equals signs or spaces; inside quotes \" and \\ stand for
// a quote and a backslash. A label the series lacks has the empty value, so
// host="" selects series without a host label and host!="" those with one.
type Matcher struct {
	terms []term
}

type term struct {
	name  string // label name; empty for the metric name
	value string // pattern
	neg   bool   // != rather than =
	bare  bool   // the metric given as a bare first term
	glob  bool   // value has glob characters
}

// metricName is the term name that refers to the metric rather than a label.
const metricName = "metric"

// ParseMatch parses a selector. An empty or blank selector matches
// everything.
func ParseMatch(s string) (Matcher, error) {
	m, err := parseMatch(s)
	if err != nil {
		return Matcher{}, fmt.Errorf("forecast: %w", err)
	}
	return m, nil
}

// parseMatch is ParseMatch with errors that do not name the package, for
// callers that wrap them in their own context.
func parseMatch(s string) (Matcher, error) {
	var m Matcher
	p := parser{s: s}
	p.space()
	if p.done() {
		return m, nil
	}
	for first := true; ; first = false {
		t, err := p.term(first)
		if err != nil {
			return Matcher{}, fmt.Errorf("selector %q: %w", s, err)
		}
		m.terms = append(m.terms, t)
		p.space()
		if p.done() {
			return m, nil
		}
		if p.s[p.i] != ',' {
			return Matcher{}, fmt.Errorf("selector %q: expected ',' at offset %d", s, p.i)
		}
		p.i++
		p.space()
	}
}

// Match reports whether a series with this metric name and these labels is
// selected.
func (m Matcher) Match(metric string, labels map[string]string) bool {
	for i := range m.terms {
		t := &m.terms[i]
		v := metric
		if t.name != "" {
			v = labels[t.name]
		}
		ok := v == t.value
		if t.glob {
			ok = glob(t.value, v)
		}
		if ok == t.neg {
			return false
		}
	}
	return true
}

// String returns the selector in the syntax ParseMatch reads; parsing it
// gives an equivalent Matcher.
func (m Matcher) String() string {
	var b strings.Builder
	for i, t := range m.terms {
		if i > 0 {
			b.WriteByte(',')
		}
		if !t.bare {
			if t.name == "" {
				b.WriteString(metricName)
			} else {
				b.WriteString(t.name)
			}
			if t.neg {
				b.WriteString("!=")
			} else {
				b.WriteByte('=')
			}
		}
		writeValue(&b, t.value)
	}
	return b.String()
}

// IsZero reports whether m is the matcher that selects everything.
func (m Matcher) IsZero() bool { return len(m.terms) == 0 }

// writeValue writes v bare when that reads back unchanged, else quoted.
func writeValue(b *strings.Builder, v string) {
	plain := v != ""
	for i := 0; i < len(v) && plain; i++ {
		plain = !isSpecial(v[i])
	}
	if plain {
		b.WriteString(v)
		return
	}
	b.WriteByte('"')
	for i := 0; i < len(v); i++ {
		if v[i] == '"' || v[i] == '\\' {
			b.WriteByte('\\')
		}
		b.WriteByte(v[i])
	}
	b.WriteByte('"')
}

// isSpecial reports the bytes that end or confuse an unquoted name or value.
func isSpecial(c byte) bool {
	switch c {
	case ',', '=', '!', '"', '\\', ' ', '\t', '\n', '\r':
		return true
	}
	return false
}

type parser struct {
	s string
	i int
}

func (p *parser) done() bool { return p.i >= len(p.s) }

func (p *parser) space() {
	for p.i < len(p.s) && (p.s[p.i] == ' ' || p.s[p.i] == '\t') {
		p.i++
	}
}

// term reads one term; first says whether a bare metric name is allowed.
func (p *parser) term(first bool) (term, error) {
	start := p.i
	if !p.done() && p.s[p.i] == '"' {
		v, err := p.quoted()
		if err != nil {
			return term{}, err
		}
		if !first {
			return term{}, fmt.Errorf("bare value %q at offset %d: only the first term may be a bare metric name", v, start)
		}
		return newTerm("", v, false, true), nil
	}
	// A name or a bare metric runs to '=', "!=", ',' or the end.
	for !p.done() {
		c := p.s[p.i]
		if c == ',' || c == '=' || (c == '!' && p.i+1 < len(p.s) && p.s[p.i+1] == '=') {
			break
		}
		if c == '"' || c == '\\' {
			return term{}, fmt.Errorf("unexpected %q at offset %d", c, p.i)
		}
		p.i++
	}
	word := strings.TrimRight(p.s[start:p.i], " \t")
	if p.done() || p.s[p.i] == ',' {
		if word == "" {
			return term{}, fmt.Errorf("empty term at offset %d", start)
		}
		if !first {
			return term{}, fmt.Errorf("bare term %q at offset %d: only the first term may be a bare metric name", word, start)
		}
		if strings.ContainsAny(word, " \t!") {
			return term{}, fmt.Errorf("bare metric %q at offset %d: quote it", word, start)
		}
		return newTerm("", word, false, true), nil
	}
	neg := p.s[p.i] == '!'
	if neg {
		p.i += 2
	} else {
		p.i++
	}
	if word == "" {
		return term{}, fmt.Errorf("missing name before offset %d", p.i)
	}
	for i := 0; i < len(word); i++ {
		if isSpecial(word[i]) || word[i] == '*' || word[i] == '?' {
			return term{}, fmt.Errorf("invalid name %q", word)
		}
	}
	p.space()
	v, err := p.value()
	if err != nil {
		return term{}, fmt.Errorf("%s: %w", word, err)
	}
	if word == metricName {
		word = ""
	}
	return newTerm(word, v, neg, false), nil
}

// value reads a quoted value, or an unquoted one up to ',' or the end.
func (p *parser) value() (string, error) {
	if !p.done() && p.s[p.i] == '"' {
		return p.quoted()
	}
	start := p.i
	for !p.done() && p.s[p.i] != ',' {
		if c := p.s[p.i]; c == '=' || c == '"' || c == '\\' {
			return "", fmt.Errorf("unquoted value contains %q at offset %d; quote the value", c, p.i)
		}
		p.i++
	}
	return strings.TrimRight(p.s[start:p.i], " \t"), nil
}

// quoted reads a double-quoted string starting at the opening quote.
func (p *parser) quoted() (string, error) {
	start := p.i
	p.i++
	var b []byte
	for !p.done() {
		c := p.s[p.i]
		switch c {
		case '"':
			p.i++
			return string(b), nil
		case '\\':
			if p.i+1 >= len(p.s) {
				return "", fmt.Errorf("unterminated quote from offset %d", start)
			}
			e := p.s[p.i+1]
			if e != '"' && e != '\\' {
				return "", fmt.Errorf("unknown escape \\%c at offset %d", e, p.i)
			}
			b = append(b, e)
			p.i += 2
		default:
			b = append(b, c)
			p.i++
		}
	}
	return "", fmt.Errorf("unterminated quote from offset %d", start)
}

func newTerm(name, value string, neg, bare bool) term {
	return term{name: name, value: value, neg: neg, bare: bare, glob: hasGlob(value)}
}
