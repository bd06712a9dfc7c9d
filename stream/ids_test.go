package stream

import (
	"testing"

	"github.com/google/uuid"
)

func TestIDSpace(t *testing.T) {
	// RFC 9562 §5.5: version 5 of a name in the URL namespace.
	if want := uuid.NewSHA1(uuid.NameSpaceURL, []byte("urn:headroom:ids")); idSpace() != want {
		t.Fatalf("idSpace %s, derived %s", idSpace(), want)
	}
}

func TestIDs(t *testing.T) {
	a, _ := incidentID(nil, `disk{host="a"}`, "full", 1000)
	tests := []struct {
		name string
		id   [16]byte
		same bool
	}{
		{"same incident", first(incidentID(nil, `disk{host="a"}`, "full", 1000)), true},
		{"other series", first(incidentID(nil, `disk{host="b"}`, "full", 1000)), false},
		{"other rule", first(incidentID(nil, `disk{host="a"}`, "fuller", 1000)), false},
		{"other time", first(incidentID(nil, `disk{host="a"}`, "full", 1001)), false},
		// The separator keeps series and rule apart.
		{"shifted boundary", first(incidentID(nil, `disk{host="a"}f`, "ull", 1000)), false},
		{"event of it", first(eventID(nil, a, "opened", 1000)), false},
	}
	for _, tt := range tests {
		if got := tt.id == a; got != tt.same {
			t.Errorf("%s: equal %v, want %v", tt.name, got, tt.same)
		}
	}
	u := uuid.UUID(a)
	if u.Version() != 5 || u.Variant() != uuid.RFC4122 {
		t.Errorf("id %s: version %d variant %v", u, u.Version(), u.Variant())
	}
	e1, _ := eventID(nil, a, "opened", 1000)
	e2, _ := eventID(nil, a, "updated", 1000)
	e3, _ := eventID(nil, a, "opened", 2000)
	if e1 == e2 || e1 == e3 {
		t.Error("events of one incident share an id")
	}
}

func first(id [16]byte, _ []byte) [16]byte { return id }
