package stream

import (
	"encoding/binary"

	"github.com/google/uuid"
)

// Incident and event ids are name-based UUIDs (RFC 9562 version 5) of
// what they name: an incident by its series, rule and opening time, an
// event by its incident, state and time. Replaying the same input gives
// the same ids, so a durable sidecar that replays the points after its
// last snapshot re-emits events that consumers, and JetStream's duplicate
// window, recognise as ones they have seen.

// idSpace returns the namespace of headroom's ids: the name-based UUID of
// "urn:headroom:ids" in the URL namespace, 60a604fb-8a7a-5968-af8c-66bd37f017f3
// (TestIDSpace derives it).
func idSpace() uuid.UUID {
	return uuid.UUID{0x60, 0xa6, 0x04, 0xfb, 0x8a, 0x7a, 0x59, 0x68, 0xaf, 0x8c, 0x66, 0xbd, 0x37, 0xf0, 0x17, 0xf3}
}

// incidentID returns the id of the incident of rule on series opened at
// ms.
func incidentID(buf []byte, series, rule string, at int64) ([16]byte, []byte) {
	buf = append(buf[:0], series...)
	buf = append(buf, 0)
	buf = append(buf, rule...)
	buf = append(buf, 0)
	buf = binary.BigEndian.AppendUint64(buf, uint64(at))
	return uuid.NewSHA1(idSpace(), buf), buf
}

// eventID returns the id of the event in state st of incident inc at ms.
func eventID(buf []byte, inc [16]byte, st string, at int64) ([16]byte, []byte) {
	buf = append(buf[:0], inc[:]...)
	buf = append(buf, st...)
	buf = append(buf, 0)
	buf = binary.BigEndian.AppendUint64(buf, uint64(at))
	return uuid.NewSHA1(idSpace(), buf), buf
}
