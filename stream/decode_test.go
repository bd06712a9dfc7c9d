package stream

import (
	"bytes"
	"encoding/binary"
	"encoding/json"
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"strings"
	"testing"
	"time"
	"unicode/utf8"

	"github.com/vmihailenco/msgpack/v5"

	"github.com/headroom-dev/headroom/state"
)

// wireTS is 2024-05-31T23:59:50Z in unix ms, ten seconds before wireClock;
// TestWireClock checks it.
const wireTS = 1717199990000

// wireClock is the fixed wall clock of the decode tests: 2024-06-01T00:00:00Z.
func wireClock() time.Time { return time.Date(2024, 6, 1, 0, 0, 0, 0, time.UTC) }

// wirePoint is a delivered point copied out of the callback.
type wirePoint struct {
	Metric string
	Labels string // "name=value" pairs in canonical order, joined by ','
	TS     int64
	Value  float64
	Key    string
	Hash   uint64
}

func wireCopy(p *Point) wirePoint {
	var ls []string
	for _, l := range p.Labels {
		ls = append(ls, string(l.Name)+"="+string(l.Value))
	}
	return wirePoint{Metric: string(p.Metric), Labels: strings.Join(ls, ","), TS: p.TS, Value: p.Value,
		Key: string(p.Key.Text), Hash: p.Key.Hash}
}

// wireDecode runs d over msg and returns what it delivered and rejected.
func wireDecode(d *Decoder, msg []byte) (pts []wirePoint, rejs []Reject, n int) {
	n = d.Decode(msg,
		func(p *Point) { pts = append(pts, wireCopy(p)) },
		func(r Reject) { rejs = append(rejs, r) })
	return pts, rejs, n
}

// wireMP builds a msgpack payload with the library's encoder
// (github.com/vmihailenco/msgpack/v5), which follows the msgpack spec.
func wireMP(t testing.TB, build func(e *msgpack.Encoder) error) []byte {
	t.Helper()
	var buf bytes.Buffer
	e := msgpack.NewEncoder(&buf)
	if err := build(e); err != nil {
		t.Fatal(err)
	}
	return buf.Bytes()
}

// wireMPPoint encodes one point map whose ts and value are written by the
// given functions, with labels as a str map.
func wireMPPoint(e *msgpack.Encoder, metric string, labels [][2]string, ts, value func(e *msgpack.Encoder) error) error {
	n := 2
	if labels != nil {
		n++
	}
	if ts != nil {
		n++
	}
	if value != nil {
		n++
	}
	if err := e.EncodeMapLen(n); err != nil {
		return err
	}
	e.EncodeString("metric")
	e.EncodeString(metric)
	e.EncodeString("extra")
	e.EncodeArrayLen(2)
	e.EncodeNil()
	e.EncodeString("skipped")
	if labels != nil {
		e.EncodeString("labels")
		e.EncodeMapLen(len(labels))
		for _, l := range labels {
			e.EncodeString(l[0])
			e.EncodeString(l[1])
		}
	}
	if ts != nil {
		e.EncodeString("ts")
		if err := ts(e); err != nil {
			return err
		}
	}
	if value != nil {
		e.EncodeString("value")
		return value(e)
	}
	return nil
}

func wireInt(v int64) func(*msgpack.Encoder) error {
	return func(e *msgpack.Encoder) error { return e.EncodeInt(v) }
}

func wireFloat(v float64) func(*msgpack.Encoder) error {
	return func(e *msgpack.Encoder) error { return e.EncodeFloat64(v) }
}

// wireRaw appends raw bytes, for encodings the library does not choose.
func wireRaw(b ...byte) func(*msgpack.Encoder) error {
	return func(e *msgpack.Encoder) error { return e.Encode(msgpack.RawMessage(b)) }
}

func wireBE64(v uint64) []byte { return binary.BigEndian.AppendUint64(nil, v) }
func wireBE32(v uint32) []byte { return binary.BigEndian.AppendUint32(nil, v) }

func wireHost() [][2]string { return [][2]string{{"host", "db-1"}, {"mount", "/data"}} }

const wireHostLabels = "host=db-1,mount=/data"

// TestWireClock checks the fixed instants the tests write as numbers.
func TestWireClock(t *testing.T) {
	// time.Date (Go standard library)
	if got := time.Date(2024, 5, 31, 23, 59, 50, 0, time.UTC).UnixMilli(); got != wireTS {
		t.Fatalf("wireTS = %d, time.Date says %d", int64(wireTS), got)
	}
	if wireClock().UnixMilli()-wireTS != 10000 {
		t.Fatal("wireClock is not ten seconds after wireTS")
	}
}

func TestDecode(t *testing.T) {
	good := wirePoint{Metric: "disk_used_bytes", Labels: wireHostLabels, TS: wireTS, Value: 42.5}
	bare := func(metric string, ts int64, v float64) wirePoint {
		return wirePoint{Metric: metric, TS: ts, Value: v}
	}
	rj := func(index int, reason string) Reject { return Reject{Index: index, Reason: reason} }
	unlimited := Limits{MaxPast: -1, MaxFuture: -1}
	// Seconds since 1970 of wireTS, for the timestamp extension.
	const sec = wireTS / 1000

	cases := []struct {
		name   string
		limits Limits
		msg    []byte
		points []wirePoint
		rejs   []Reject
	}{
		// JSON: shapes and encodings.
		{name: "json single", msg: []byte(`{"metric":"disk_used_bytes","labels":{"host":"db-1","mount":"/data"},"ts":1717199990000,"value":42.5}`),
			points: []wirePoint{good}},
		{name: "json array", msg: []byte(` [ {"metric":"disk_used_bytes","labels":{"mount":"/data","host":"db-1"},"ts":1717199990000,"value":42.5} ,
			{"value":-1e3,"ts":1717199990001,"metric":"up"} ] `),
			points: []wirePoint{good, bare("up", wireTS+1, -1000)}},
		{name: "json empty array", msg: []byte(`[]`)},
		{name: "json ts rfc3339", msg: []byte(`{"metric":"m","ts":"2024-05-31T23:59:50Z","value":1}`),
			points: []wirePoint{bare("m", wireTS, 1)}},
		{name: "json ts rfc3339 nano offset", msg: []byte(`{"metric":"m","ts":"2024-06-01T01:59:50.123456789+02:00","value":1}`),
			points: []wirePoint{bare("m", wireTS+123, 1)}},
		{name: "json ts float truncated", msg: []byte(`{"metric":"m","ts":1717199990000.9,"value":1}`),
			points: []wirePoint{bare("m", wireTS, 1)}},
		{name: "json ts exponent", msg: []byte(`{"metric":"m","ts":1.71719999e12,"value":1}`),
			points: []wirePoint{bare("m", wireTS, 1)}},
		{name: "json value forms", msg: []byte(`[{"metric":"m","ts":1717199990000,"value":-0},
			{"metric":"m","ts":1717199990000,"value":12345678901234567890},
			{"metric":"m","ts":1717199990000,"value":2.5E-3},
			{"metric":"m","ts":1717199990000,"value":0.1}]`),
			points: []wirePoint{bare("m", wireTS, math.Copysign(0, -1)), bare("m", wireTS, 12345678901234567890),
				bare("m", wireTS, 0.0025), bare("m", wireTS, 0.1)}},
		{name: "json unknown fields skipped", msg: []byte(`{"unit":"bytes","metric":"m","x":{"a":[1,2,{"b":null}],"c":"}"},
			"ts":1717199990000,"y":[true,false,null,-1.5e+7,"\"\\"],"value":1,"z":{}}`),
			points: []wirePoint{bare("m", wireTS, 1)}},
		{name: "json labels null and empty", msg: []byte(`[{"metric":"m","labels":null,"ts":1717199990000,"value":1},{"metric":"m","labels":{},"ts":1717199990000,"value":2}]`),
			points: []wirePoint{bare("m", wireTS, 1), bare("m", wireTS, 2)}},
		{name: "json escapes", msg: []byte(`{"metric":"caf\u00e9_\ud83d\ude00","labels":{"path":"a\"b\\c\/d\n\t","k\u0031":"\ud800"},"ts":1717199990000,"value":1}`),
			points: []wirePoint{{Metric: "café_😀", Labels: "k1=\uFFFD,path=a\"b\\c/d\n\t", TS: wireTS, Value: 1}}},
		{name: "json escaped field name", msg: []byte(`{"\u006detric":"m","ts":1717199990000,"value":1}`),
			points: []wirePoint{bare("m", wireTS, 1)}},
		{name: "json label value with anything", msg: []byte(`{"metric":"m","labels":{"q":"a.b *> ü"},"ts":1717199990000,"value":1}`),
			points: []wirePoint{{Metric: "m", Labels: "q=a.b *> ü", TS: wireTS, Value: 1}}},
		{name: "json repeated field last wins", msg: []byte(`{"metric":"m","labels":{"a":"1"},"labels":{"b":"2"},"ts":1,"ts":1717199990000,"value":1}`),
			points: []wirePoint{{Metric: "m", Labels: "b=2", TS: wireTS, Value: 1}}},

		// JSON: rejections.
		{name: "json good after bad", msg: []byte(`[{"metric":"m","ts":1717199990000,"value":"NaN"},{"metric":"m","ts":1717199990000,"value":2}]`),
			points: []wirePoint{bare("m", wireTS, 2)}, rejs: []Reject{rj(0, ReasonBadValue)}},
		{name: "json element not object", msg: []byte(`[1,{"metric":"m","ts":1717199990000,"value":2},[{}]]`),
			points: []wirePoint{bare("m", wireTS, 2)}, rejs: []Reject{rj(0, ReasonMalformed), rj(2, ReasonMalformed)}},
		{name: "json oversize", limits: Limits{MaxMessage: 10}, msg: []byte(`{"metric":"m","ts":1717199990000,"value":2}`),
			rejs: []Reject{rj(-1, ReasonOversize)}},
		{name: "json too many points", limits: Limits{MaxPoints: 2}, msg: []byte(`[{"metric":"a","ts":1717199990000,"value":1},{"metric":"b","ts":1717199990000,"value":2},{"metric":"c","ts":1717199990000,"value":3}]`),
			points: []wirePoint{bare("a", wireTS, 1), bare("b", wireTS, 2)}, rejs: []Reject{rj(-1, ReasonTooManyPoints)}},
		{name: "json too many labels", limits: Limits{MaxLabels: 2}, msg: []byte(`{"metric":"m","labels":{"a":"1","b":"2","c":"3"},"ts":1717199990000,"value":1}`),
			rejs: []Reject{rj(0, ReasonTooManyLabels)}},
		{name: "json long metric", limits: Limits{MaxName: 4}, msg: []byte(`[{"metric":"abcde","ts":1717199990000,"value":1},{"metric":"abcd","ts":1717199990000,"value":1}]`),
			points: []wirePoint{bare("abcd", wireTS, 1)}, rejs: []Reject{rj(0, ReasonBadMetric)}},
		{name: "json long label name", limits: Limits{MaxName: 4}, msg: []byte(`{"metric":"m","labels":{"abcde":"1"},"ts":1717199990000,"value":1}`),
			rejs: []Reject{rj(0, ReasonBadLabel)}},
		{name: "json long label value", limits: Limits{MaxValue: 4}, msg: []byte(`{"metric":"m","labels":{"a":"12345"},"ts":1717199990000,"value":1}`),
			rejs: []Reject{rj(0, ReasonBadLabel)}},
		{name: "json duplicate label", msg: []byte(`{"metric":"m","labels":{"a":"1","b":"2","a":"3"},"ts":1717199990000,"value":1}`),
			rejs: []Reject{rj(0, ReasonBadLabel)}},
		{name: "json empty label name", msg: []byte(`{"metric":"m","labels":{"":"1"},"ts":1717199990000,"value":1}`),
			rejs: []Reject{rj(0, ReasonBadLabel)}},
		{name: "json label name with equals", msg: []byte(`{"metric":"m","labels":{"a=b":"1"},"ts":1717199990000,"value":1}`),
			rejs: []Reject{rj(0, ReasonBadLabel)}},
		{name: "json label value not string", msg: []byte(`{"metric":"m","labels":{"a":1},"ts":1717199990000,"value":1}`),
			rejs: []Reject{rj(0, ReasonBadLabel)}},
		{name: "json labels not object", msg: []byte(`{"metric":"m","labels":["a"],"ts":1717199990000,"value":1}`),
			rejs: []Reject{rj(0, ReasonBadLabel)}},
		{name: "json metric number", msg: []byte(`{"metric":12,"ts":1717199990000,"value":1}`),
			rejs: []Reject{rj(0, ReasonBadMetric)}},
		{name: "json metric missing", msg: []byte(`{"ts":1717199990000,"value":1}`),
			rejs: []Reject{rj(0, ReasonBadMetric)}},
		{name: "json metric empty", msg: []byte(`{"metric":"","ts":1717199990000,"value":1}`),
			rejs: []Reject{rj(0, ReasonBadMetric)}},
		{name: "json metric control char", msg: []byte(`{"metric":"a\u0001","ts":1717199990000,"value":1}`),
			rejs: []Reject{rj(0, ReasonBadMetric)}},
		{name: "json metric C1 control char", msg: []byte(`{"metric":"a\u0085","ts":1717199990000,"value":1}`),
			rejs: []Reject{rj(0, ReasonBadMetric)}},
		{name: "json metric brace", msg: []byte(`{"metric":"a{b=\"c\"}","ts":1717199990000,"value":1}`),
			rejs: []Reject{rj(0, ReasonBadMetric)}},
		{name: "json metric invalid utf8", msg: []byte("{\"metric\":\"a\xff\",\"ts\":1717199990000,\"value\":1}"),
			rejs: []Reject{rj(0, ReasonBadMetric)}},
		{name: "json label value invalid utf8", msg: []byte("{\"metric\":\"m\",\"labels\":{\"a\":\"\xc3\"},\"ts\":1717199990000,\"value\":1}"),
			rejs: []Reject{rj(0, ReasonBadLabel)}},
		{name: "json value string", msg: []byte(`{"metric":"m","ts":1717199990000,"value":"+Inf"}`),
			rejs: []Reject{rj(0, ReasonBadValue)}},
		{name: "json value missing", msg: []byte(`{"metric":"m","ts":1717199990000}`),
			rejs: []Reject{rj(0, ReasonBadValue)}},
		{name: "json value overflow", msg: []byte(`{"metric":"m","ts":1717199990000,"value":1e400}`),
			rejs: []Reject{rj(0, ReasonBadValue)}},
		{name: "json ts far future", msg: []byte(`{"metric":"m","ts":1717300000000,"value":1}`), // now + 27.8 h
			rejs: []Reject{rj(0, ReasonTSOutOfRange)}},
		{name: "json ts far past", msg: []byte(`{"metric":"m","ts":"2020-01-01T00:00:00Z","value":1}`),
			rejs: []Reject{rj(0, ReasonTSOutOfRange)}},
		{name: "json ts overflow", msg: []byte(`{"metric":"m","ts":99999999999999999999,"value":1}`),
			rejs: []Reject{rj(0, ReasonTSOutOfRange)}},
		{name: "json ts unlimited", limits: unlimited, msg: []byte(`{"metric":"m","ts":-62135596800000,"value":1}`), // year 1
			points: []wirePoint{bare("m", -62135596800000, 1)}},
		{name: "json ts bad string", msg: []byte(`{"metric":"m","ts":"yesterday","value":1}`),
			rejs: []Reject{rj(0, ReasonBadTimestamp)}},
		{name: "json ts bad date", msg: []byte(`{"metric":"m","ts":"2024-02-30T00:00:00Z","value":1}`),
			rejs: []Reject{rj(0, ReasonBadTimestamp)}},
		{name: "json ts bool", msg: []byte(`{"metric":"m","ts":true,"value":1}`),
			rejs: []Reject{rj(0, ReasonBadTimestamp)}},
		{name: "json ts missing", msg: []byte(`{"metric":"m","value":1}`),
			rejs: []Reject{rj(0, ReasonBadTimestamp)}},
		{name: "json truncated", msg: []byte(`{"metric":"m","ts":1717199990000,"val`),
			rejs: []Reject{rj(-1, ReasonMalformed)}},
		{name: "json truncated array after a point", msg: []byte(`[{"metric":"m","ts":1717199990000,"value":1},{"metric":"m","ts":17`),
			points: []wirePoint{bare("m", wireTS, 1)}, rejs: []Reject{rj(-1, ReasonMalformed)}},
		{name: "json broken skipped value", msg: []byte(`{"metric":"m","x":[1,],"ts":1717199990000,"value":1}`),
			rejs: []Reject{rj(-1, ReasonMalformed)}},
		{name: "json trailing data", msg: []byte(`{"metric":"m","ts":1717199990000,"value":1} x`),
			points: []wirePoint{bare("m", wireTS, 1)}, rejs: []Reject{rj(-1, ReasonMalformed)}},
		{name: "json leading zero", msg: []byte(`{"metric":"m","ts":1717199990000,"value":01}`),
			rejs: []Reject{rj(-1, ReasonMalformed)}},
		{name: "json bad escape", msg: []byte(`{"metric":"m\x","ts":1717199990000,"value":1}`),
			rejs: []Reject{rj(-1, ReasonMalformed)}},
		{name: "json raw control in string", msg: []byte("{\"metric\":\"m\n\",\"ts\":1717199990000,\"value\":1}"),
			rejs: []Reject{rj(-1, ReasonMalformed)}},
		{name: "json too deep", msg: []byte(`{"x":` + strings.Repeat("[", jsonMaxDepth+1) + strings.Repeat("]", jsonMaxDepth+1) + `}`),
			rejs: []Reject{rj(-1, ReasonMalformed)}},
		{name: "json deep within limit", msg: []byte(`{"metric":"m","ts":1717199990000,"value":1,"x":` + strings.Repeat("[", jsonMaxDepth) + strings.Repeat("]", jsonMaxDepth) + `}`),
			points: []wirePoint{bare("m", wireTS, 1)}},
		{name: "neither encoding", msg: []byte(`hello`), rejs: []Reject{rj(-1, ReasonMalformed)}},
		{name: "empty", msg: []byte(``), rejs: []Reject{rj(-1, ReasonMalformed)}},
		{name: "only whitespace", msg: []byte(" \n"), rejs: []Reject{rj(-1, ReasonMalformed)}},

		// msgpack: shapes and encodings.
		{name: "msgpack single", msg: wireMP(t, func(e *msgpack.Encoder) error {
			return wireMPPoint(e, "disk_used_bytes", wireHost(), wireInt(wireTS), wireFloat(42.5))
		}), points: []wirePoint{good}},
		{name: "msgpack array", msg: wireMP(t, func(e *msgpack.Encoder) error {
			e.EncodeArrayLen(2)
			wireMPPoint(e, "disk_used_bytes", [][2]string{{"mount", "/data"}, {"host", "db-1"}}, wireInt(wireTS), wireFloat(42.5))
			return wireMPPoint(e, "up", nil, wireInt(wireTS+1), wireInt(-1))
		}), points: []wirePoint{good, bare("up", wireTS+1, -1)}},
		{name: "msgpack ts int families", msg: wireMP(t, func(e *msgpack.Encoder) error {
			e.EncodeArrayLen(4)
			wireMPPoint(e, "m", nil, func(e *msgpack.Encoder) error { return e.EncodeUint64(wireTS) }, wireFloat(1))
			wireMPPoint(e, "m", nil, func(e *msgpack.Encoder) error { return e.EncodeInt64(wireTS) }, wireFloat(2))
			wireMPPoint(e, "m", nil, wireRaw(0xce, 0, 0, 0, 5), wireFloat(3))                    // uint 32 (msgpack spec)
			return wireMPPoint(e, "m", nil, wireRaw(0xd2, 0xff, 0xff, 0xff, 0xfe), wireFloat(4)) // int 32 (msgpack spec)
		}), limits: unlimited, points: []wirePoint{bare("m", wireTS, 1), bare("m", wireTS, 2), bare("m", 5, 3), bare("m", -2, 4)}},
		{name: "msgpack ts float and string", msg: wireMP(t, func(e *msgpack.Encoder) error {
			e.EncodeArrayLen(3)
			wireMPPoint(e, "m", nil, wireFloat(wireTS+0.75), wireFloat(1))
			wireMPPoint(e, "m", nil, func(e *msgpack.Encoder) error { return e.EncodeFloat32(1.5) }, wireFloat(2))
			return wireMPPoint(e, "m", nil, func(e *msgpack.Encoder) error { return e.EncodeString("2024-05-31T23:59:50.5Z") }, wireFloat(3))
		}), limits: unlimited, points: []wirePoint{bare("m", wireTS, 1), bare("m", 1, 2), bare("m", wireTS+500, 3)}},
		// Timestamp extension type -1 in its three layouts, written byte by
		// byte from the msgpack spec.
		{name: "msgpack ts ext 32", msg: wireMP(t, func(e *msgpack.Encoder) error {
			return wireMPPoint(e, "m", nil, wireRaw(append([]byte{0xd6, 0xff}, wireBE32(sec)...)...), wireFloat(1))
		}), points: []wirePoint{bare("m", wireTS, 1)}},
		{name: "msgpack ts ext 64", msg: wireMP(t, func(e *msgpack.Encoder) error {
			return wireMPPoint(e, "m", nil, wireRaw(append([]byte{0xd7, 0xff}, wireBE64(uint64(250_000_000)<<34|sec)...)...), wireFloat(1))
		}), points: []wirePoint{bare("m", wireTS+250, 1)}},
		{name: "msgpack ts ext 96", msg: wireMP(t, func(e *msgpack.Encoder) error {
			p := append([]byte{0xc7, 12, 0xff}, wireBE32(999_999_999)...)
			return wireMPPoint(e, "m", nil, wireRaw(append(p, wireBE64(uint64(math.MaxUint64-1))...)...), wireFloat(1)) // -2 s
		}), limits: unlimited, points: []wirePoint{bare("m", -1001, 1)}},
		{name: "msgpack ts ext via library", msg: wireMP(t, func(e *msgpack.Encoder) error {
			e.EncodeArrayLen(3)
			wireMPPoint(e, "m", nil, func(e *msgpack.Encoder) error { return e.EncodeTime(time.UnixMilli(wireTS)) }, wireFloat(1))
			wireMPPoint(e, "m", nil, func(e *msgpack.Encoder) error { return e.EncodeTime(time.UnixMilli(wireTS + 7)) }, wireFloat(2))
			return wireMPPoint(e, "m", nil, func(e *msgpack.Encoder) error { return e.EncodeTime(time.UnixMilli(-5)) }, wireFloat(3))
		}), limits: unlimited, points: []wirePoint{bare("m", wireTS, 1), bare("m", wireTS+7, 2), bare("m", -5, 3)}},
		{name: "msgpack value families", msg: wireMP(t, func(e *msgpack.Encoder) error {
			e.EncodeArrayLen(6)
			wireMPPoint(e, "m", nil, wireInt(wireTS), wireRaw(0x05))                                // positive fixint
			wireMPPoint(e, "m", nil, wireInt(wireTS), wireRaw(0xff))                                // negative fixint
			wireMPPoint(e, "m", nil, wireInt(wireTS), wireRaw(0xd0, 0x80))                          // int 8
			wireMPPoint(e, "m", nil, wireInt(wireTS), wireRaw(0xcd, 0x01, 0x00))                    // uint 16
			wireMPPoint(e, "m", nil, wireInt(wireTS), wireRaw(0xcf, 0xff, 0, 0, 0, 0, 0, 0, 0))     // uint 64
			return wireMPPoint(e, "m", nil, wireInt(wireTS), wireRaw(0xca, 0x3f, 0xc0, 0x00, 0x00)) // float 32 1.5
		}), points: []wirePoint{bare("m", wireTS, 5), bare("m", wireTS, -1), bare("m", wireTS, -128), bare("m", wireTS, 256),
			bare("m", wireTS, 0xff<<56), bare("m", wireTS, 1.5)}},
		{name: "msgpack bin strings and nil labels", msg: wireMP(t, func(e *msgpack.Encoder) error {
			e.EncodeMapLen(4)
			e.EncodeBytes([]byte("metric"))
			e.EncodeBytes([]byte("m"))
			e.EncodeString("labels")
			e.EncodeNil()
			e.EncodeString("ts")
			e.EncodeInt(wireTS)
			e.EncodeString("value")
			return e.EncodeInt(3)
		}), points: []wirePoint{bare("m", wireTS, 3)}},
		{name: "msgpack non-string key skipped", msg: wireMP(t, func(e *msgpack.Encoder) error {
			e.EncodeMapLen(4)
			e.EncodeInt(7)
			e.EncodeMap(map[string]any{"a": []int{1, 2}})
			e.EncodeString("metric")
			e.EncodeString("m")
			e.EncodeString("ts")
			e.EncodeInt(wireTS)
			e.EncodeString("value")
			return e.EncodeInt(3)
		}), points: []wirePoint{bare("m", wireTS, 3)}},

		// msgpack: rejections.
		{name: "msgpack non-finite", msg: wireMP(t, func(e *msgpack.Encoder) error {
			e.EncodeArrayLen(4)
			wireMPPoint(e, "m", nil, wireInt(wireTS), wireFloat(math.NaN()))
			wireMPPoint(e, "m", nil, wireInt(wireTS), wireFloat(math.Inf(1)))
			wireMPPoint(e, "m", nil, wireInt(wireTS), func(e *msgpack.Encoder) error { return e.EncodeFloat32(float32(math.Inf(-1))) })
			return wireMPPoint(e, "m", nil, wireInt(wireTS), wireFloat(4))
		}), points: []wirePoint{bare("m", wireTS, 4)}, rejs: []Reject{rj(0, ReasonNonFinite), rj(1, ReasonNonFinite), rj(2, ReasonNonFinite)}},
		{name: "msgpack metric number", msg: wireMP(t, func(e *msgpack.Encoder) error {
			e.EncodeArrayLen(2)
			e.EncodeMap(map[string]any{"metric": 5, "ts": wireTS, "value": 1})
			return wireMPPoint(e, "m", nil, wireInt(wireTS), wireFloat(4))
		}), points: []wirePoint{bare("m", wireTS, 4)}, rejs: []Reject{rj(0, ReasonBadMetric)}},
		{name: "msgpack element not map", msg: wireMP(t, func(e *msgpack.Encoder) error {
			e.EncodeArrayLen(2)
			e.EncodeArrayLen(1)
			e.EncodeString("x")
			return wireMPPoint(e, "m", nil, wireInt(wireTS), wireFloat(4))
		}), points: []wirePoint{bare("m", wireTS, 4)}, rejs: []Reject{rj(0, ReasonMalformed)}},
		{name: "msgpack ts other ext", msg: wireMP(t, func(e *msgpack.Encoder) error {
			return wireMPPoint(e, "m", nil, wireRaw(0xd6, 0x05, 0, 0, 0, 1), wireFloat(1))
		}), rejs: []Reject{rj(0, ReasonBadTimestamp)}},
		{name: "msgpack ts ext bad nanoseconds", msg: wireMP(t, func(e *msgpack.Encoder) error {
			return wireMPPoint(e, "m", nil, wireRaw(append([]byte{0xd7, 0xff}, wireBE64(uint64(1_000_000_000)<<34|sec)...)...), wireFloat(1))
		}), rejs: []Reject{rj(0, ReasonBadTimestamp)}},
		{name: "msgpack ts ext bad length", msg: wireMP(t, func(e *msgpack.Encoder) error {
			return wireMPPoint(e, "m", nil, wireRaw(0xd5, 0xff, 0, 1), wireFloat(1))
		}), rejs: []Reject{rj(0, ReasonBadTimestamp)}},
		{name: "msgpack ts huge uint", msg: wireMP(t, func(e *msgpack.Encoder) error {
			return wireMPPoint(e, "m", nil, func(e *msgpack.Encoder) error { return e.EncodeUint64(math.MaxUint64) }, wireFloat(1))
		}), rejs: []Reject{rj(0, ReasonTSOutOfRange)}},
		{name: "msgpack ts far future and past", msg: wireMP(t, func(e *msgpack.Encoder) error {
			e.EncodeArrayLen(2)
			wireMPPoint(e, "m", nil, wireInt(wireTS+25*3600*1000), wireFloat(1))
			return wireMPPoint(e, "m", nil, wireInt(wireTS-367*24*3600*1000), wireFloat(1))
		}), rejs: []Reject{rj(0, ReasonTSOutOfRange), rj(1, ReasonTSOutOfRange)}},
		{name: "msgpack ts nil", msg: wireMP(t, func(e *msgpack.Encoder) error {
			return wireMPPoint(e, "m", nil, func(e *msgpack.Encoder) error { return e.EncodeNil() }, wireFloat(1))
		}), rejs: []Reject{rj(0, ReasonBadTimestamp)}},
		{name: "msgpack value string", msg: wireMP(t, func(e *msgpack.Encoder) error {
			return wireMPPoint(e, "m", nil, wireInt(wireTS), func(e *msgpack.Encoder) error { return e.EncodeString("1") })
		}), rejs: []Reject{rj(0, ReasonBadValue)}},
		{name: "msgpack label value number", msg: wireMP(t, func(e *msgpack.Encoder) error {
			return e.EncodeMap(map[string]any{"metric": "m", "labels": map[string]any{"a": 1}, "ts": wireTS, "value": 1})
		}), rejs: []Reject{rj(0, ReasonBadLabel)}},
		{name: "msgpack label name number", msg: wireMP(t, func(e *msgpack.Encoder) error {
			return e.EncodeMap(map[string]any{"metric": "m", "labels": map[int]string{1: "a"}, "ts": wireTS, "value": 1})
		}), rejs: []Reject{rj(0, ReasonBadLabel)}},
		{name: "msgpack duplicate label", msg: wireMP(t, func(e *msgpack.Encoder) error {
			return wireMPPoint(e, "m", [][2]string{{"a", "1"}, {"a", "1"}}, wireInt(wireTS), wireFloat(1))
		}), rejs: []Reject{rj(0, ReasonBadLabel)}},
		{name: "msgpack too many labels", limits: Limits{MaxLabels: 1}, msg: wireMP(t, func(e *msgpack.Encoder) error {
			return wireMPPoint(e, "m", wireHost(), wireInt(wireTS), wireFloat(1))
		}), rejs: []Reject{rj(0, ReasonTooManyLabels)}},
		{name: "msgpack too many points", limits: Limits{MaxPoints: 1}, msg: wireMP(t, func(e *msgpack.Encoder) error {
			e.EncodeArrayLen(2)
			wireMPPoint(e, "a", nil, wireInt(wireTS), wireFloat(1))
			return wireMPPoint(e, "b", nil, wireInt(wireTS), wireFloat(2))
		}), points: []wirePoint{bare("a", wireTS, 1)}, rejs: []Reject{rj(-1, ReasonTooManyPoints)}},
		{name: "msgpack oversize", limits: Limits{MaxMessage: 16}, msg: wireMP(t, func(e *msgpack.Encoder) error {
			return wireMPPoint(e, "m", wireHost(), wireInt(wireTS), wireFloat(1))
		}), rejs: []Reject{rj(-1, ReasonOversize)}},
		{name: "msgpack truncated", msg: wireMP(t, func(e *msgpack.Encoder) error {
			return wireMPPoint(e, "m", wireHost(), wireInt(wireTS), wireFloat(1))
		})[:20], rejs: []Reject{rj(-1, ReasonMalformed)}},
		{name: "msgpack truncated after a point", msg: wireMP(t, func(e *msgpack.Encoder) error {
			e.EncodeArrayLen(3)
			wireMPPoint(e, "a", nil, wireInt(wireTS), wireFloat(1))
			return wireMPPoint(e, "b", nil, wireInt(wireTS), wireFloat(2))
		}), points: []wirePoint{bare("a", wireTS, 1), bare("b", wireTS, 2)}, rejs: []Reject{rj(-1, ReasonMalformed)}},
		{name: "msgpack trailing bytes", msg: append(wireMP(t, func(e *msgpack.Encoder) error {
			return wireMPPoint(e, "m", nil, wireInt(wireTS), wireFloat(1))
		}), 0x01), points: []wirePoint{bare("m", wireTS, 1)}, rejs: []Reject{rj(-1, ReasonMalformed)}},
		{name: "msgpack never-used byte", msg: []byte{0x81, 0xa1, 'x', 0xc1}, rejs: []Reject{rj(-1, ReasonMalformed)}},
		{name: "msgpack huge declared array", msg: []byte{0xdd, 0xff, 0xff, 0xff, 0xff, 0x80}, rejs: []Reject{rj(-1, ReasonMalformed)}},
		{name: "msgpack huge declared str", msg: []byte{0x81, 0xdb, 0xff, 0xff, 0xff, 0xff, 'x'}, rejs: []Reject{rj(-1, ReasonMalformed)}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			d := NewDecoder(c.limits, wireClock)
			pts, rejs, n := wireDecode(d, c.msg)
			if n != len(pts) {
				t.Errorf("Decode returned %d, delivered %d", n, len(pts))
			}
			for i := range pts {
				pts[i].Key, pts[i].Hash = "", 0
			}
			if !slices.EqualFunc(pts, c.points, func(a, b wirePoint) bool {
				return a.Metric == b.Metric && a.Labels == b.Labels && a.TS == b.TS &&
					math.Float64bits(a.Value) == math.Float64bits(b.Value)
			}) {
				t.Errorf("points\n got %+v\nwant %+v", pts, c.points)
			}
			if len(rejs) != len(c.rejs) {
				t.Fatalf("rejects\n got %+v\nwant %+v", rejs, c.rejs)
			}
			for i, r := range rejs {
				if r.Index != c.rejs[i].Index || r.Reason != c.rejs[i].Reason || r.Detail == "" {
					t.Errorf("reject %d: got %+v, want %+v with a detail", i, r, c.rejs[i])
				}
			}
		})
	}
}

// TestDecodeKey checks that the key is canonical: label order and encoding
// do not matter.
func TestDecodeKey(t *testing.T) {
	msgs := [][]byte{
		[]byte(`{"metric":"disk_used_bytes","labels":{"host":"db-1","mount":"/data","a":"x\"y"},"ts":1717199990000,"value":1}`),
		[]byte(`{"labels":{"a":"x\"y","mount":"/data","host":"db-1"},"metric":"disk_used_bytes","ts":1717199990000,"value":1}`),
		wireMP(t, func(e *msgpack.Encoder) error {
			return wireMPPoint(e, "disk_used_bytes", [][2]string{{"mount", "/data"}, {"a", `x"y`}, {"host", "db-1"}}, wireInt(wireTS), wireFloat(1))
		}),
	}
	// Our own contract: the text state.AppendCanonical writes.
	const want = `disk_used_bytes{a="x\"y",host="db-1",mount="/data"}`
	d := NewDecoder(Limits{}, wireClock)
	for i, m := range msgs {
		pts, rejs, _ := wireDecode(d, m)
		if len(pts) != 1 || len(rejs) != 0 {
			t.Fatalf("message %d: points %v rejects %v", i, pts, rejs)
		}
		if pts[0].Key != want || pts[0].Hash != state.Hash([]byte(want)) {
			t.Errorf("message %d: key %q hash %x, want %q %x", i, pts[0].Key, pts[0].Hash, want, state.Hash([]byte(want)))
		}
	}
}

// TestDecodeReuse checks that a decoder reused across messages carries
// nothing from one to the next.
func TestDecodeReuse(t *testing.T) {
	d := NewDecoder(Limits{}, wireClock)
	first := []byte(`{"metric":"a\n","labels":{"x":"1","y":"2","z":"\u0041"},"ts":1717199990000,"value":1}`)
	second := []byte(`{"metric":"b","ts":1717199990000,"value":2}`)
	wireDecode(d, first)
	pts, rejs, _ := wireDecode(d, second)
	if len(rejs) != 0 || len(pts) != 1 || pts[0].Labels != "" || pts[0].Key != "b" {
		t.Fatalf("got %+v %+v", pts, rejs)
	}
}

// TestParseRFC3339 compares the parser with time.Parse (Go standard
// library) on fixed and random times.
func TestParseRFC3339(t *testing.T) {
	fixed := []string{
		"1970-01-01T00:00:00Z", "1969-12-31T23:59:59.999Z", "2000-02-29T12:00:00+05:30",
		"1900-03-01T00:00:00-00:30", "0001-01-01T00:00:00Z", "9999-12-31T23:59:59.999999999Z",
		"2024-05-31T23:59:50.1Z", "2024-05-31T23:59:50.123456789123Z", "0000-03-01T00:00:00Z",
		"2024-06-01t00:00:00z",
	}
	bad := []string{
		"", "2024-05-31", "2024-05-31T23:59:50", "2024-13-01T00:00:00Z", "2024-00-01T00:00:00Z",
		"2023-02-29T00:00:00Z", "1900-02-29T00:00:00Z", "2024-04-31T00:00:00Z", "2024-01-01T24:00:00Z",
		"2024-01-01T00:60:00Z", "2024-01-01T00:00:60Z", "2024-01-01T00:00:00.Z", "2024-01-01T00:00:00+0100",
		"2024-01-01T00:00:00+24:00", "2024-01-01T00:00:00+01:60", "2024-01-01 00:00:00Z", "2024-01-01T00:00:00ZZ",
		"+024-01-01T00:00:00Z", "2024-1-01T00:00:00Z", "2024-01-01T00:00:00+01:00x",
	}
	for _, s := range fixed {
		got, ok := parseRFC3339([]byte(s))
		want, err := time.Parse(time.RFC3339Nano, strings.ToUpper(s)) // Go standard library
		if !ok || err != nil || got != want.UnixMilli() {
			t.Errorf("%s: got %d %v, time.Parse %d %v", s, got, ok, want.UnixMilli(), err)
		}
	}
	for _, s := range bad {
		if got, ok := parseRFC3339([]byte(s)); ok {
			t.Errorf("%q: accepted as %d", s, got)
		}
	}
	r := rand.New(rand.NewPCG(1, 2))
	for range 20000 {
		sec := r.Int64N(253402300800+62135596800) - 62135596800 // years 0001..9999
		tm := time.Unix(sec, r.Int64N(1e9))
		if r.IntN(2) == 0 {
			tm = tm.In(time.FixedZone("", (r.IntN(48)-24)*1800))
		}
		s := tm.Format(time.RFC3339Nano)
		want, err := time.Parse(time.RFC3339Nano, s) // Go standard library
		got, ok := parseRFC3339([]byte(s))
		if err != nil || !ok || got != want.UnixMilli() {
			t.Fatalf("%s: got %d %v, time.Parse %d %v", s, got, ok, want.UnixMilli(), err)
		}
	}
}

// wireGen makes random valid points for the cross-checks.
type wireGen struct{ r *rand.Rand }

// text returns a random string; names never hold control characters, '{'
// or '=', values may hold anything valid.
func (g wireGen) text(name bool, maxLen int) string {
	pieces := []string{"a", "Z", "0", "_", ".", " ", "*", ">", "/", "-", "é", "日本", "😀", "\"", "\\", "<", "&", "'", "\u2028"}
	if !name {
		pieces = append(pieces, "\n", "\t", "\x01", "{", "=", "\x7f")
	}
	var sb strings.Builder
	n := g.r.IntN(maxLen) + 1
	for sb.Len() < n {
		sb.WriteString(pieces[g.r.IntN(len(pieces))])
	}
	return sb.String()
}

func (g wireGen) value() float64 {
	switch g.r.IntN(5) {
	case 0:
		return float64(g.r.Int64N(1<<40) - 1<<39)
	case 1:
		return g.r.NormFloat64() * math.Pow(10, float64(g.r.IntN(40)-20))
	case 2:
		for {
			f := math.Float64frombits(g.r.Uint64())
			if !math.IsNaN(f) && !math.IsInf(f, 0) {
				return f
			}
		}
	case 3:
		return float64(g.r.IntN(1000)) / 100
	}
	return g.r.Float64()
}

func (g wireGen) labels() map[string]string {
	m := make(map[string]string)
	for range g.r.IntN(6) {
		m[g.text(true, 12)] = g.text(false, 20)
	}
	return m
}

func (g wireGen) ts() int64 { return wireTS - g.r.Int64N(300*24*3600*1000) }

// TestDecodeJSONCrossCheck decodes random valid messages with this decoder
// and with encoding/json (Go standard library) and compares the results.
func TestDecodeJSONCrossCheck(t *testing.T) {
	type jp struct {
		Metric string            `json:"metric"`
		Labels map[string]string `json:"labels,omitempty"`
		TS     any               `json:"ts"`
		Value  float64           `json:"value"`
		Note   any               `json:"note,omitempty"`
	}
	g := wireGen{rand.New(rand.NewPCG(3, 4))}
	d := NewDecoder(Limits{}, wireClock)
	for iter := range 2000 {
		pts := make([]jp, g.r.IntN(8)+1)
		for i := range pts {
			pts[i] = jp{Metric: g.text(true, 30), Labels: g.labels(), Value: g.value()}
			ts := g.ts()
			switch g.r.IntN(3) {
			case 0:
				pts[i].TS = ts
			case 1:
				pts[i].TS = time.UnixMilli(ts).In(time.FixedZone("", g.r.IntN(20)*3600)).Format(time.RFC3339Nano)
			default:
				pts[i].TS = float64(ts) + 0.25
			}
			if g.r.IntN(3) == 0 {
				pts[i].Note = map[string]any{"a": []any{1.5, "x", nil, true}, "b": g.text(false, 8)}
			}
		}
		var msg []byte
		var err error
		if len(pts) == 1 && iter%2 == 0 {
			msg, err = json.Marshal(pts[0])
		} else {
			msg, err = json.MarshalIndent(pts, "", " ")
		}
		if err != nil {
			t.Fatal(err)
		}
		// Decode the same bytes with encoding/json as the reference.
		var ref []struct {
			Metric string
			Labels map[string]string
			TS     json.RawMessage
			Value  float64
		}
		if msg[0] == '{' {
			msg2 := append(append([]byte{'['}, msg...), ']')
			err = json.Unmarshal(msg2, &ref)
		} else {
			err = json.Unmarshal(msg, &ref)
		}
		if err != nil {
			t.Fatal(err)
		}
		got, rejs, _ := wireDecode(d, msg)
		if len(rejs) != 0 || len(got) != len(ref) {
			t.Fatalf("%s: got %d points, rejects %v, want %d", msg, len(got), rejs, len(ref))
		}
		for i, r := range ref {
			var ts int64
			if r.TS[0] == '"' {
				var s string
				json.Unmarshal(r.TS, &s)
				tm, err := time.Parse(time.RFC3339Nano, s)
				if err != nil {
					t.Fatal(err)
				}
				ts = tm.UnixMilli()
			} else {
				var f float64
				json.Unmarshal(r.TS, &f)
				ts = int64(f)
			}
			names := state.LabelNames(r.Labels)
			var ls []string
			for _, n := range names {
				ls = append(ls, n+"="+r.Labels[n])
			}
			want := wirePoint{Metric: r.Metric, Labels: strings.Join(ls, ","), TS: ts, Value: r.Value}
			g := got[i]
			if g.Metric != want.Metric || g.Labels != want.Labels || g.TS != want.TS || math.Float64bits(g.Value) != math.Float64bits(want.Value) {
				t.Fatalf("point %d of %s:\n got %+v\nwant %+v", i, msg, g, want)
			}
		}
	}
}

// TestDecodeMsgpackCrossCheck encodes random points with the msgpack
// library (github.com/vmihailenco/msgpack/v5) in varied type families,
// decodes them with this decoder and with the library, and compares.
func TestDecodeMsgpackCrossCheck(t *testing.T) {
	g := wireGen{rand.New(rand.NewPCG(5, 6))}
	d := NewDecoder(Limits{}, wireClock)
	for range 2000 {
		n := g.r.IntN(8) + 1
		type want struct {
			metric string
			labels map[string]string
			ts     int64
			value  float64
		}
		wants := make([]want, n)
		msg := wireMP(t, func(e *msgpack.Encoder) error {
			e.UseCompactInts(g.r.IntN(2) == 0)
			e.EncodeArrayLen(n)
			for i := range wants {
				w := want{metric: g.text(true, 30), labels: g.labels(), ts: g.ts(), value: g.value()}
				e.EncodeMapLen(4)
				e.EncodeString("metric")
				if g.r.IntN(4) == 0 {
					e.EncodeBytes([]byte(w.metric))
				} else {
					e.EncodeString(w.metric)
				}
				e.EncodeString("labels")
				e.EncodeMap(wireAnyMap(w.labels))
				e.EncodeString("ts")
				switch g.r.IntN(5) {
				case 0:
					e.EncodeInt(w.ts)
				case 1:
					e.EncodeUint(uint64(w.ts))
				case 2:
					e.EncodeFloat64(float64(w.ts) + 0.5)
				case 3:
					e.EncodeTime(time.UnixMilli(w.ts).Add(time.Duration(g.r.IntN(1e6))))
				default:
					e.EncodeString(time.UnixMilli(w.ts).UTC().Format(time.RFC3339Nano))
				}
				e.EncodeString("value")
				switch g.r.IntN(4) {
				case 0:
					w.value = math.Round(w.value)
					if math.Abs(w.value) > 1<<62 {
						w.value = 7
					}
					w.value = float64(int64(w.value)) // no -0 among integers
					e.EncodeInt(int64(w.value))
				case 1:
					w.value = float64(float32(w.value))
					if math.IsInf(w.value, 0) {
						w.value = 1
					}
					e.EncodeFloat32(float32(w.value))
				default:
					e.EncodeFloat64(w.value)
				}
				wants[i] = w
			}
			return nil
		})
		// The library's own reading of the message.
		var ref []map[string]any
		if err := msgpack.Unmarshal(msg, &ref); err != nil {
			t.Fatal(err)
		}
		got, rejs, _ := wireDecode(d, msg)
		if len(rejs) != 0 || len(got) != n || len(ref) != n {
			t.Fatalf("got %d points, rejects %v, library %d, want %d", len(got), rejs, len(ref), n)
		}
		for i, w := range wants {
			r := ref[i]
			metric := fmt.Sprint(r["metric"])
			if b, ok := r["metric"].([]byte); ok {
				metric = string(b)
			}
			var refTS int64
			switch v := r["ts"].(type) {
			case time.Time:
				refTS = v.UnixMilli()
			case string:
				tm, _ := time.Parse(time.RFC3339Nano, v)
				refTS = tm.UnixMilli()
			case float64:
				refTS = int64(v)
			default:
				refTS = wireToInt(v)
			}
			var refValue float64
			switch v := r["value"].(type) {
			case float32:
				refValue = float64(v)
			case float64:
				refValue = v
			default:
				refValue = float64(wireToInt(v))
			}
			refLabels := map[string]string{}
			for k, v := range r["labels"].(map[string]any) {
				refLabels[k] = v.(string)
			}
			if metric != w.metric || refTS != w.ts || refValue != w.value || !wireMapsEqual(refLabels, w.labels) {
				t.Fatalf("library read %q %v %d %v, generated %+v", metric, refLabels, refTS, refValue, w)
			}
			gp := got[i]
			var ls []string
			for _, k := range state.LabelNames(w.labels) {
				ls = append(ls, k+"="+w.labels[k])
			}
			if gp.Metric != w.metric || gp.Labels != strings.Join(ls, ",") || gp.TS != w.ts || math.Float64bits(gp.Value) != math.Float64bits(w.value) {
				t.Fatalf("point %d: got %+v, want %+v", i, gp, w)
			}
		}
	}
}

func wireAnyMap(m map[string]string) map[string]any {
	out := make(map[string]any, len(m))
	for k, v := range m {
		out[k] = v
	}
	return out
}

func wireMapsEqual(a, b map[string]string) bool {
	if len(a) != len(b) {
		return false
	}
	for k, v := range a {
		if w, ok := b[k]; !ok || w != v {
			return false
		}
	}
	return true
}

func wireToInt(v any) int64 {
	switch v := v.(type) {
	case int8:
		return int64(v)
	case int16:
		return int64(v)
	case int32:
		return int64(v)
	case int64:
		return v
	case uint8:
		return int64(v)
	case uint16:
		return int64(v)
	case uint32:
		return int64(v)
	case uint64:
		return int64(v)
	}
	panic(fmt.Sprintf("not an integer: %T", v))
}

// wireCheckPoint checks a delivered point against the validation rules,
// independently of the decoder's own code.
func wireCheckPoint(t *testing.T, p *Point, lim Limits, now time.Time) {
	t.Helper()
	lim = lim.withDefaults()
	m := p.Metric
	if len(m) == 0 || len(m) > lim.MaxName || !utf8.Valid(m) || bytes.ContainsAny(m, "{") || wireHasControl(m) {
		t.Fatalf("invalid metric %q delivered", m)
	}
	if len(p.Labels) > lim.MaxLabels {
		t.Fatalf("%d labels delivered", len(p.Labels))
	}
	for i, l := range p.Labels {
		if len(l.Name) == 0 || len(l.Name) > lim.MaxName || !utf8.Valid(l.Name) || bytes.ContainsAny(l.Name, "=") || wireHasControl(l.Name) {
			t.Fatalf("invalid label name %q delivered", l.Name)
		}
		if len(l.Value) > lim.MaxValue || !utf8.Valid(l.Value) {
			t.Fatalf("invalid label value %q delivered", l.Value)
		}
		if i > 0 && string(p.Labels[i-1].Name) >= string(l.Name) {
			t.Fatalf("labels not sorted and unique: %q then %q", p.Labels[i-1].Name, l.Name)
		}
	}
	if math.IsNaN(p.Value) || math.IsInf(p.Value, 0) {
		t.Fatalf("non-finite value %v delivered", p.Value)
	}
	nowMs := now.UnixMilli()
	if lim.MaxPast >= 0 && p.TS < nowMs-lim.MaxPast.Milliseconds() || lim.MaxFuture >= 0 && p.TS > nowMs+lim.MaxFuture.Milliseconds() {
		t.Fatalf("ts %d outside the limits around %d", p.TS, nowMs)
	}
	ls := make([]state.Label, len(p.Labels))
	copy(ls, p.Labels)
	k := state.MakeKey(nil, p.Metric, ls)
	if string(k.Text) != string(p.Key.Text) || k.Hash != p.Key.Hash {
		t.Fatalf("key %q %x, want %q %x", p.Key.Text, p.Key.Hash, k.Text, k.Hash)
	}
}

func wireHasControl(b []byte) bool {
	for _, r := range string(b) {
		if r < 0x20 || r >= 0x7f && r <= 0x9f {
			return true
		}
	}
	return false
}

// TestDecodeAllocs checks the steady state of the msgpack path allocates
// nothing, with ts as an extension and labels out of order.
func TestDecodeAllocs(t *testing.T) {
	msg := wireBenchMsgpack(t)
	d := NewDecoder(Limits{}, wireClock)
	ok := func(*Point) {}
	bad := func(r Reject) { t.Fatalf("rejected %+v", r) }
	d.Decode(msg, ok, bad)
	if n := testing.AllocsPerRun(20, func() { d.Decode(msg, ok, bad) }); n != 0 {
		t.Errorf("msgpack: %v allocs per message", n)
	}
	js := wireBenchJSON(t)
	d.Decode(js, ok, bad)
	if n := testing.AllocsPerRun(20, func() { d.Decode(js, ok, bad) }); n != 0 {
		t.Errorf("json: %v allocs per message", n)
	}
}

// TestDecodeTruncated cuts valid messages at every byte: each strict prefix
// must be reported as malformed once, after the points it held whole.
func TestDecodeTruncated(t *testing.T) {
	d := NewDecoder(Limits{}, wireClock)
	for _, msg := range [][]byte{wireBenchMsgpack(t), wireBenchJSON(t), []byte{0x82, 0xa2, 't', 's', 0x01, 0xa5, 'v', 'a', 'l', 'u', 'e', 0x01}} {
		for i := range len(msg) {
			var whole []Reject
			d.Decode(msg[:i], nil, func(r Reject) {
				if r.Index == -1 {
					whole = append(whole, r)
				}
			})
			if len(whole) != 1 || whole[0].Reason != ReasonMalformed {
				t.Fatalf("prefix of %d bytes: whole-message rejects %+v", i, whole)
			}
		}
	}
}
