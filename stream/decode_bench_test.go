package stream

import (
	"bytes"
	"encoding/json"
	"fmt"
	"testing"

	"github.com/vmihailenco/msgpack/v5"

	"github.com/headroom-dev/headroom/state"
)

// wireBenchPoints is the number of points in a benchmark message.
const wireBenchPoints = 128

type wireBenchPoint struct {
	Metric string            `json:"metric" msgpack:"metric"`
	Labels map[string]string `json:"labels" msgpack:"labels"`
	TS     int64             `json:"ts" msgpack:"ts"`
	Value  float64           `json:"value" msgpack:"value"`
}

// wireBenchSeries returns the i-th point of the benchmark message: three
// metrics, three labels each, written out of canonical order as a producer
// iterating a map would.
func wireBenchSeries(i int) (metric string, labels [][2]string, ts int64, value float64) {
	metrics := []string{"disk_used_bytes", "cpu_seconds_total", "mem_rss_bytes"}
	return metrics[i%3], [][2]string{
		{"region", "eu-west-1"},
		{"host", fmt.Sprintf("db-%d", i)},
		{"mount", "/data"},
	}, wireTS + int64(i), 1e9 + float64(i)*1234.5678
}

// wireBenchMsgpack encodes the benchmark message with the msgpack library
// (github.com/vmihailenco/msgpack/v5).
func wireBenchMsgpack(tb testing.TB) []byte {
	return wireMP(tb, func(e *msgpack.Encoder) error {
		e.EncodeArrayLen(wireBenchPoints)
		for i := range wireBenchPoints {
			m, ls, ts, v := wireBenchSeries(i)
			e.EncodeMapLen(4)
			e.EncodeString("metric")
			e.EncodeString(m)
			e.EncodeString("labels")
			e.EncodeMapLen(len(ls))
			for _, l := range ls {
				e.EncodeString(l[0])
				e.EncodeString(l[1])
			}
			e.EncodeString("ts")
			e.EncodeInt(ts)
			e.EncodeString("value")
			if err := e.EncodeFloat64(v); err != nil {
				return err
			}
		}
		return nil
	})
}

// wireBenchJSON writes the benchmark message as JSON, labels in the same
// order as the msgpack one.
func wireBenchJSON(tb testing.TB) []byte {
	var b bytes.Buffer
	b.WriteByte('[')
	for i := range wireBenchPoints {
		m, ls, ts, v := wireBenchSeries(i)
		if i > 0 {
			b.WriteByte(',')
		}
		fmt.Fprintf(&b, `{"metric":%q,"labels":{`, m)
		for j, l := range ls {
			if j > 0 {
				b.WriteByte(',')
			}
			fmt.Fprintf(&b, "%q:%q", l[0], l[1])
		}
		fv, _ := json.Marshal(v)
		fmt.Fprintf(&b, `},"ts":%d,"value":%s}`, ts, fv)
	}
	b.WriteByte(']')
	if !json.Valid(b.Bytes()) {
		tb.Fatal("benchmark JSON is invalid")
	}
	return b.Bytes()
}

func wireBenchDecoder(b *testing.B, msg []byte) {
	d := NewDecoder(Limits{}, wireClock)
	var sum uint64
	ok := func(p *Point) { sum += p.Key.Hash }
	bad := func(r Reject) { b.Fatalf("rejected %+v", r) }
	if n := d.Decode(msg, ok, bad); n != wireBenchPoints {
		b.Fatalf("decoded %d points", n)
	}
	b.SetBytes(int64(len(msg)))
	b.ReportAllocs()
	b.ResetTimer()
	for b.Loop() {
		d.Decode(msg, ok, bad)
	}
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N*wireBenchPoints), "ns/point")
}

// BenchmarkDecodeMsgpack decodes a 128-point msgpack message, canonical
// keys and hashes included.
func BenchmarkDecodeMsgpack(b *testing.B) { wireBenchDecoder(b, wireBenchMsgpack(b)) }

// BenchmarkDecodeJSON decodes the same points as JSON.
func BenchmarkDecodeJSON(b *testing.B) { wireBenchDecoder(b, wireBenchJSON(b)) }

// BenchmarkDecodeMsgpackLibrary decodes the same message with the typed
// calls of github.com/vmihailenco/msgpack/v5 and builds the same keys. It
// validates nothing, which only flatters it. Strings are copied into reused
// scratch so that the allocations counted are the library's own.
func BenchmarkDecodeMsgpackLibrary(b *testing.B) {
	msg := wireBenchMsgpack(b)
	rd := bytes.NewReader(msg)
	dec := msgpack.NewDecoder(rd)
	var (
		scratch []byte
		spans   [][2]int // label name and value spans in scratch
		labels  []state.Label
		keyBuf  []byte
		sum     uint64
	)
	decode := func() {
		rd.Reset(msg)
		dec.Reset(rd)
		n, err := dec.DecodeArrayLen()
		if err != nil {
			b.Fatal(err)
		}
		for range n {
			m, _ := dec.DecodeMapLen()
			scratch, spans = scratch[:0], spans[:0]
			var metric [2]int
			var ts int64
			var v float64
			for range m {
				k, _ := dec.DecodeString()
				switch k {
				case "metric":
					s, _ := dec.DecodeString()
					metric = [2]int{len(scratch), len(scratch) + len(s)}
					scratch = append(scratch, s...)
				case "labels":
					ln, _ := dec.DecodeMapLen()
					for range ln {
						name, _ := dec.DecodeString()
						spans = append(spans, [2]int{len(scratch), len(scratch) + len(name)})
						scratch = append(scratch, name...)
						val, _ := dec.DecodeString()
						spans = append(spans, [2]int{len(scratch), len(scratch) + len(val)})
						scratch = append(scratch, val...)
					}
				case "ts":
					ts, _ = dec.DecodeInt64()
				case "value":
					v, _ = dec.DecodeFloat64()
				default:
					dec.Skip()
				}
			}
			labels = labels[:0]
			for i := 0; i+1 < len(spans); i += 2 {
				labels = append(labels, state.Label{
					Name:  scratch[spans[i][0]:spans[i][1]],
					Value: scratch[spans[i+1][0]:spans[i+1][1]]})
			}
			k := state.MakeKey(keyBuf, scratch[metric[0]:metric[1]], labels)
			keyBuf = k.Text[:0]
			sum += k.Hash + uint64(ts) + uint64(v)
		}
	}
	decode()
	b.SetBytes(int64(len(msg)))
	b.ReportAllocs()
	b.ResetTimer()
	for b.Loop() {
		decode()
	}
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N*wireBenchPoints), "ns/point")
}

// BenchmarkDecodeMsgpackLibraryReflect decodes the same message with the
// reflection path of github.com/vmihailenco/msgpack/v5 into structs and
// builds the same keys.
func BenchmarkDecodeMsgpackLibraryReflect(b *testing.B) {
	wireBenchReflect(b, wireBenchMsgpack(b), msgpack.Unmarshal)
}

// BenchmarkDecodeJSONStdlib decodes the JSON message with encoding/json into
// structs and builds the same keys.
func BenchmarkDecodeJSONStdlib(b *testing.B) {
	wireBenchReflect(b, wireBenchJSON(b), json.Unmarshal)
}

func wireBenchReflect(b *testing.B, msg []byte, unmarshal func([]byte, any) error) {
	var (
		pts    []wireBenchPoint
		labels []state.Label
		keyBuf []byte
	)
	decode := func() {
		pts = pts[:0]
		if err := unmarshal(msg, &pts); err != nil || len(pts) != wireBenchPoints {
			b.Fatal(err, len(pts))
		}
		for i := range pts {
			labels = labels[:0]
			for n, v := range pts[i].Labels {
				labels = append(labels, state.Label{Name: []byte(n), Value: []byte(v)})
			}
			k := state.MakeKey(keyBuf, []byte(pts[i].Metric), labels)
			keyBuf = k.Text[:0]
		}
	}
	decode()
	b.SetBytes(int64(len(msg)))
	b.ReportAllocs()
	b.ResetTimer()
	for b.Loop() {
		decode()
	}
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N*wireBenchPoints), "ns/point")
}

// BenchmarkToken derives the subject token of a three-label series.
func BenchmarkToken(b *testing.B) {
	m, ls, _, _ := wireBenchSeries(7)
	labels := make([]state.Label, len(ls))
	for i, l := range ls {
		labels[i] = state.Label{Name: []byte(l[0]), Value: []byte(l[1])}
	}
	k := state.MakeKey(nil, []byte(m), labels)
	buf := make([]byte, 0, 128)
	b.ReportAllocs()
	for b.Loop() {
		buf = AppendToken(buf[:0], k)
	}
}
