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
package state
