package stream

import (
	"encoding/binary"
	"math"
	"time"
	"unicode/utf8"

	"github.com/headroom-dev/headroom/state"
)

// Decoder turns point messages into Points. It is reusable and keeps its
// scratch between messages so that the steady state allocates nothing; it
// is not safe for concurrent use, so use one per goroutine. The zero
// Decoder uses the default limits and time.Now.
type Decoder struct {
	lim    Limits
	now    func() time.Time
	lo, hi int64 // accepted ts range of the current message, unix ms

	ok  func(*Point)
	bad func(Reject)
	n   int // points delivered from the current message

	pt     Point
	draft  draft
	labels []state.Label
	key    []byte // canonical key text
	str    []byte // unescaped JSON strings of the current point
	nest   [jsonMaxDepth / 64]uint64
}

// draft collects the fields of the point being decoded. The first problem
// met is kept; decoding goes on to the end of the point so that the next one
// can still be read.
type draft struct {
	metric                   []byte
	ts                       int64
	value                    float64
	hasMetric, hasTS, hasVal bool
	reason, detail           string
}

// NewDecoder returns a Decoder enforcing l. now is the wall clock that
// timestamps are judged against, read once per message; nil means time.Now.
func NewDecoder(l Limits, now func() time.Time) *Decoder {
	if now == nil {
		now = time.Now
	}
	l = l.withDefaults()
	return &Decoder{
		lim:    l,
		now:    now,
		labels: make([]state.Label, 0, min(l.MaxLabels, 64)),
		key:    make([]byte, 0, 256),
	}
}

// Decode decodes one message, JSON when its first byte after optional
// whitespace is '{' or '[', msgpack when its first byte is a map or an array.
// The message holds one point (a map) or an array of points.
//
// Decode calls ok for each valid point and bad for each rejected point,
// whose Index is its position in the message (0 for a lone point). A bad
// point does not stop the others. When the message is oversize, of
// neither encoding, or structurally broken, bad is called once with Index -1
// and the rest of the message, after the points already delivered, is
// dropped; so are the points after the first MaxPoints. Either callback may
// be nil. Decode returns the number of points delivered.
func (d *Decoder) Decode(msg []byte, ok func(*Point), bad func(Reject)) int {
	if d.now == nil { // a zero Decoder works too
		d.lim, d.now = d.lim.withDefaults(), time.Now
	}
	d.ok, d.bad, d.n = ok, bad, 0
	defer d.release()
	if len(msg) > d.lim.MaxMessage {
		d.reject(-1, ReasonOversize, "message longer than the size limit")
		return 0
	}
	d.setClock()
	i := jsonSpace(msg, 0)
	switch {
	case i < len(msg) && (msg[i] == '{' || msg[i] == '['):
		d.decodeJSON(msg, i)
	case len(msg) > 0 && mpIsContainer(msg[0]):
		d.decodeMsgpack(msg)
	case len(msg) == 0:
		d.reject(-1, ReasonMalformed, "empty message")
	default:
		d.reject(-1, ReasonMalformed, "message is neither a JSON nor a msgpack map or array")
	}
	return d.n
}

// release drops what the Decoder must not keep past a call: the callbacks
// and any reference into the caller's message.
func (d *Decoder) release() {
	d.ok, d.bad = nil, nil
	d.pt = Point{}
	d.draft = draft{}
	clear(d.labels[:cap(d.labels)])
	d.labels = d.labels[:0]
}

// setClock fixes the accepted timestamp range for one message, saturating
// rather than overflowing for huge limits.
func (d *Decoder) setClock() {
	now := d.now().UnixMilli()
	d.lo, d.hi = math.MinInt64, math.MaxInt64
	if p := d.lim.MaxPast.Milliseconds(); d.lim.MaxPast >= 0 && now >= math.MinInt64+p {
		d.lo = now - p
	}
	if f := d.lim.MaxFuture.Milliseconds(); d.lim.MaxFuture >= 0 && now <= math.MaxInt64-f {
		d.hi = now + f
	}
}

func (d *Decoder) reject(index int, reason, detail string) {
	if d.bad != nil {
		d.bad(Reject{Index: index, Reason: reason, Detail: detail})
	}
}

// tooMany reports the points past MaxPoints as one rejection.
func (d *Decoder) tooMany() {
	d.reject(-1, ReasonTooManyPoints, "message holds more points than the limit; the rest was dropped")
}

// begin starts a new point.
func (d *Decoder) begin() {
	d.draft = draft{}
	d.labels = d.labels[:0]
	d.str = d.str[:0]
}

// fail records the first problem of the current point.
func (d *Decoder) fail(reason, detail string) {
	if d.draft.reason == "" {
		d.draft.reason, d.draft.detail = reason, detail
	}
}

// setMetric records the metric of the current point after checking it.
func (d *Decoder) setMetric(m []byte) {
	d.draft.metric, d.draft.hasMetric = m, true
	switch {
	case len(m) == 0:
		d.fail(ReasonBadMetric, "empty metric")
	case len(m) > d.lim.MaxName:
		d.fail(ReasonBadMetric, "metric longer than the name limit")
	case !validName(m, '{'):
		// '{' would make the canonical key ambiguous.
		d.fail(ReasonBadMetric, "metric is not valid UTF-8 or holds a control character or '{'")
	}
}

// addLabel checks a label and appends it to the current point. Checking
// here, while the label is at hand, is cheaper than a second pass.
func (d *Decoder) addLabel(name, value []byte) {
	switch {
	case len(d.labels) >= d.lim.MaxLabels:
		d.fail(ReasonTooManyLabels, "point has more labels than the limit")
		return
	case len(name) == 0:
		d.fail(ReasonBadLabel, "empty label name")
	case len(name) > d.lim.MaxName:
		d.fail(ReasonBadLabel, "label name longer than the name limit")
	case !validName(name, '='):
		// '=' would make the canonical key ambiguous.
		d.fail(ReasonBadLabel, "label name is not valid UTF-8 or holds a control character or '='")
	case len(value) > d.lim.MaxValue:
		d.fail(ReasonBadLabel, "label value longer than the value limit")
	case !validUTF8(value):
		d.fail(ReasonBadLabel, "label value is not valid UTF-8")
	}
	d.labels = append(d.labels, state.Label{Name: name, Value: value})
}

// resetLabels forgets the labels read so far; a repeated labels field
// replaces the earlier one, as a repeated scalar field does.
func (d *Decoder) resetLabels() {
	d.labels = d.labels[:0]
}

// finish validates the current point, the index-th of its message, and
// hands it to ok or bad.
func (d *Decoder) finish(index int) {
	p := &d.draft
	if p.reason == "" {
		d.validate()
	}
	if p.reason == "" {
		d.pt.Key = state.MakeKey(d.key, p.metric, d.labels)
		d.key = d.pt.Key.Text[:0] // keep the grown buffer
		for i := 1; i < len(d.labels); i++ {
			if string(d.labels[i].Name) == string(d.labels[i-1].Name) {
				d.fail(ReasonBadLabel, "duplicate label name")
				break
			}
		}
	}
	if p.reason != "" {
		d.reject(index, p.reason, p.detail)
		return
	}
	d.pt.Metric, d.pt.Labels, d.pt.TS, d.pt.Value = p.metric, d.labels, p.ts, p.value
	d.n++
	if d.ok != nil {
		d.ok(&d.pt)
	}
}

// validate applies the rules that need the whole point; names and label
// values were checked as they were read.
func (d *Decoder) validate() {
	p := &d.draft
	switch {
	case !p.hasMetric:
		d.fail(ReasonBadMetric, "missing metric")
	case !p.hasVal:
		d.fail(ReasonBadValue, "missing value")
	case p.value-p.value != 0: // NaN or infinite
		d.fail(ReasonNonFinite, "value is NaN or infinite")
	case !p.hasTS:
		d.fail(ReasonBadTimestamp, "missing ts")
	case p.ts < d.lo:
		d.fail(ReasonTSOutOfRange, "ts further in the past than the limit")
	case p.ts > d.hi:
		d.fail(ReasonTSOutOfRange, "ts further in the future than the limit")
	}
}

// validName reports whether b is valid UTF-8 without control characters
// (C0, DEL, C1) and without the byte forbid.
func validName(b []byte, forbid byte) bool {
	if printableASCII(b, forbid) {
		return true
	}
	for i := 0; i < len(b); {
		c := b[i]
		if c < utf8.RuneSelf {
			if c < 0x20 || c == 0x7f || c == forbid {
				return false
			}
			i++
			continue
		}
		r, size := utf8.DecodeRune(b[i:])
		if r == utf8.RuneError && size == 1 || r >= 0x80 && r <= 0x9f {
			return false
		}
		i += size
	}
	return true
}

// Byte-lane masks for checking eight bytes at a time.
const (
	lanes01 = 0x0101010101010101
	lanes80 = 0x8080808080808080
)

// printableASCII reports whether b holds only bytes 0x20..0x7e other than
// forbid; false means "look closer". Names are nearly always plain ASCII
// and short, so it checks eight bytes at a time and reads the last, partial
// word from b's capacity (the rest of the message), masking what is past
// len(b).
func printableASCII(b []byte, forbid byte) bool {
	f, del := lanes01*uint64(forbid), uint64(lanes01*0x7f)
	var acc uint64
	for {
		var w uint64
		switch {
		case len(b) >= 8:
			w = binary.LittleEndian.Uint64(b)
		case len(b) == 0:
			return acc&lanes80 == 0
		case cap(b) >= 8:
			keep := uint64(1)<<(8*len(b)) - 1
			w = binary.LittleEndian.Uint64(b[:8])&keep | lanes01*'a'&^keep
		default:
			for _, c := range b {
				if c < 0x20 || c >= 0x7f || c == forbid {
					return false
				}
			}
			return acc&lanes80 == 0
		}
		// With no high bit set, w-0x20.. sets one exactly when a byte is
		// below 0x20, and (v-0x01..)&^v when a byte of v is zero.
		x, y := w^f, w^del
		acc |= w | (w - lanes01*0x20) | (x-lanes01)&^x | (y-lanes01)&^y
		b = b[min(8, len(b)):]
	}
}

// validUTF8 is utf8.Valid with a cheaper start for short ASCII text, read
// the same way as in printableASCII.
func validUTF8(b []byte) bool {
	for i := 0; i < len(b); i += 8 {
		var w uint64
		switch rest := b[i:]; {
		case len(rest) >= 8:
			w = binary.LittleEndian.Uint64(rest)
		case cap(rest) >= 8:
			w = binary.LittleEndian.Uint64(rest[:8]) & (uint64(1)<<(8*len(rest)) - 1)
		default:
			return utf8.Valid(rest)
		}
		if w&lanes80 != 0 {
			return utf8.Valid(b[i:])
		}
	}
	return true
}

// setTSFloat truncates a float timestamp in ms, which producers send when
// their language has no integers.
func (d *Decoder) setTSFloat(f float64) {
	switch {
	case math.IsNaN(f) || math.IsInf(f, 0):
		d.fail(ReasonBadTimestamp, "ts is not a finite number")
	case f >= math.MaxInt64 || f < math.MinInt64:
		d.fail(ReasonTSOutOfRange, "ts out of the int64 range")
	default:
		d.setTS(int64(f))
	}
}

func (d *Decoder) setTS(ms int64) {
	d.draft.ts, d.draft.hasTS = ms, true
}

func (d *Decoder) setValue(v float64) {
	d.draft.value, d.draft.hasVal = v, true
}

// parseRFC3339 parses an RFC 3339 date-time (section 5.6:
// YYYY-MM-DDTHH:MM:SS[.frac](Z|+HH:MM|-HH:MM), 'T' and 'Z' in either case)
// into unix ms, truncating the fraction. It does the work of time.Parse
// without allocating, which matters on the hot path.
func parseRFC3339(s []byte) (int64, bool) {
	if len(s) < 20 || s[4] != '-' || s[7] != '-' || s[10] != 'T' && s[10] != 't' || s[13] != ':' || s[16] != ':' {
		return 0, false
	}
	year, ok1 := rfcDigits(s[0:4])
	month, ok2 := rfcDigits(s[5:7])
	day, ok3 := rfcDigits(s[8:10])
	hour, ok4 := rfcDigits(s[11:13])
	minute, ok5 := rfcDigits(s[14:16])
	sec, ok6 := rfcDigits(s[17:19])
	if !(ok1 && ok2 && ok3 && ok4 && ok5 && ok6) {
		return 0, false
	}
	i := 19
	var ms int64
	if s[i] == '.' {
		i++
		start := i
		for ; i < len(s) && s[i] >= '0' && s[i] <= '9'; i++ {
			if i-start < 3 {
				ms = ms*10 + int64(s[i]-'0')
			}
		}
		if i == start {
			return 0, false
		}
		for n := i - start; n < 3; n++ {
			ms *= 10
		}
	}
	if i >= len(s) {
		return 0, false
	}
	var off int64 // minutes east of UTC
	switch s[i] {
	case 'Z', 'z':
		i++
	case '+', '-':
		if len(s)-i != 6 || s[i+3] != ':' {
			return 0, false
		}
		oh, ok1 := rfcDigits(s[i+1 : i+3])
		om, ok2 := rfcDigits(s[i+4 : i+6])
		if !ok1 || !ok2 || oh > 23 || om > 59 {
			return 0, false
		}
		off = oh*60 + om
		if s[i] == '-' {
			off = -off
		}
		i += 6
	default:
		return 0, false
	}
	if i != len(s) || month < 1 || month > 12 || day < 1 || day > rfcDaysIn(year, month) ||
		hour > 23 || minute > 59 || sec > 59 {
		return 0, false
	}
	secs := daysFromCivil(year, month, day)*86400 + hour*3600 + minute*60 + sec - off*60
	return secs*1000 + ms, true
}

// rfcDigits parses a short run of ASCII digits.
func rfcDigits(b []byte) (int64, bool) {
	var n int64
	for _, c := range b {
		if c < '0' || c > '9' {
			return 0, false
		}
		n = n*10 + int64(c-'0')
	}
	return n, true
}

func rfcDaysIn(year, month int64) int64 {
	switch month {
	case 2:
		if year%4 == 0 && (year%100 != 0 || year%400 == 0) {
			return 29
		}
		return 28
	case 4, 6, 9, 11:
		return 30
	}
	return 31
}

// daysFromCivil counts days from 1970-01-01 to a proleptic Gregorian date,
// after H. Hinnant's published days_from_civil algorithm.
func daysFromCivil(y, m, d int64) int64 {
	if m <= 2 {
		y--
	}
	era := y / 400
	if y < 0 { // year 0000 in January or February; floor division
		era = (y - 399) / 400
	}
	yoe := y - era*400
	mp := (m + 9) % 12
	doy := (153*mp+2)/5 + d - 1
	doe := yoe*365 + yoe/4 - yoe/100 + doy
	return era*146097 + doe - 719468
}
