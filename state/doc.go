// Package state keeps per-series history as windows of sufficient statistics.
//
// Every series owns a fixed number of time buckets at several resolutions
// (the Layout): by default one-minute buckets for the last two hours,
// fifteen-minute buckets for the last day and hourly buckets for two weeks.
// A point updates the open bucket of its series in O(1); a bucket closes when
// the series' own clock (the newest timestamp it has seen) has moved past the
// bucket's end plus the allowed lateness, so results never depend on batching
// or arrival speed. Closed buckets hold a count and a mean; a View copies the
// closed history of one series, oldest first, and Sums fits a least-squares
// line over any range of it in O(1) through prefix sums.
//
// Series live in partitions chosen by a stable hash of the canonical series
// key (FNV-1a, 64 bit). Each partition has its own lock, index and slab of
// bucket memory, sized in chunks once and reused, so many subscribers ingest
// concurrently and several processes can later split the partitions between
// them.
//
// The ingest path is laid out for the cache. Cache misses, not arithmetic,
// set the cost of a point once series outnumber what the cache holds, so
// what every point reads and writes (identity, clock, base and open
// buckets) sits in a dense array of one-line hot records, a series' closed
// buckets and coarse accumulators in one block of lines of its own, and
// the rest in a cold record that only views and the pipeline read. A series
// is identified by its FNV-1a hash together with an independent 64-bit
// check hash of its key, so the key text is only compared for keys whose
// FNV-1a hashes collide. AddBatch applies many points at once and loads the
// memory they need in passes of independent reads before applying them,
// so that their cache misses overlap.
//
// WriteSnapshot writes everything the series of a store hold, bit for bit,
// with a few bytes of the caller's (where in its input the state stands),
// and Restore rebuilds an equal store from it, possibly with another
// number of partitions, so that a restarted process goes on exactly as if
// it had never stopped.
package state
