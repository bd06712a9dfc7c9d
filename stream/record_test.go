package stream

import (
	"testing"
	"time"
)

func TestFormatDuration(t *testing.T) {
	for _, c := range []struct {
		d    time.Duration
		want string
	}{
		{24 * time.Hour, "24h"},
		{6 * time.Hour, "6h"},
		{90 * time.Minute, "1h30m"},
		{10 * time.Minute, "10m"},
		{45 * time.Second, "45s"},
		{time.Hour + 30*time.Second, "1h0m30s"},
	} {
		if got := formatDuration(c.d); got != c.want {
			t.Errorf("formatDuration(%v) = %q, want %q", c.d, got, c.want)
		}
	}
}

func TestRejectPayload(t *testing.T) {
	var r RejectRecord
	r.setPayload([]byte(`{"metric":"x"}`))
	if r.Encoding != "utf8" || r.Payload != `{"metric":"x"}` || r.Size != 14 {
		t.Errorf("text payload: %+v", r)
	}
	big := make([]byte, 5000)
	big[0] = 0xff
	r.setPayload(big)
	if r.Encoding != "base64" || r.Size != 5000 || len(r.Payload) != 4*((maxRejectPayload+2)/3) {
		t.Errorf("binary payload: encoding %s size %d len %d", r.Encoding, r.Size, len(r.Payload))
	}
}
