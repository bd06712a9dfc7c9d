// Package stream moves points and records between NATS and the store.
//
// It decodes point messages (JSON or msgpack, one point or an array),
// feeds them to the state store through a Processor, evaluates forecasts and
// breach rules when a series closes a bucket, and publishes forecast records,
// breach events and rejected input on subjects derived from a configurable
// prefix. The Processor knows nothing of NATS, so the replay command runs
// the very same code over a file; Ingest and Publisher are the transport.
//
// Durable is the transport that survives restarts: it reads points from a
// JetStream stream in order, snapshots the store with the stream sequence
// it covers (WriteSnapshot, to Snapshots: a directory or an object store),
// and LoadState with Durable.From resumes after the snapshot, so that a
// sidecar that crashed ends in the state of one that never stopped.
// Incident and event ids are derived from what they name, so the records
// a replay emits again carry the ids they had.
package stream
