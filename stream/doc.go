// Package stream moves points and records between NATS and the store.
//
// It decodes point messages (JSON or msgpack, one point or an array),
// feeds them to the state store through a Processor, evaluates forecasts and
// breach rules when a series closes a bucket, and publishes forecast records,
// breach events and rejected input on subjects derived from a configurable
// prefix. The Processor knows nothing of NATS, so the replay command runs
// the very same code over a file; Ingest and Publisher are the transport.
package stream
