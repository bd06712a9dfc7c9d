package state

// View is a copy of one series' closed history, made under the partition
// lock so that forecasting can run on it without holding anything.
//
// The composite sequence T/Y/W/N merges the levels: hourly buckets for the
// far past, fifteen-minute buckets where those exist, one-minute buckets for
// the recent past, without overlap, oldest first, empty buckets left out
// (gaps are gaps, never zeros). Levels holds each level as a uniform
// sequence with NaN for empty buckets, for engines that need even spacing.
// A View is reused between calls: Series.View resets it and keeps capacity.
type View struct {
	Key  string // canonical series key
	Hash uint64
	End  int64 // unix ms: end of the newest closed bucket, the forecast origin

	T []float64 // bucket centre, seconds relative to End (negative)
	Y []float64 // bucket mean
	W []float64 // weight: bucket width in hours (inverse-variance for white noise)
	N []uint32  // raw points in the bucket

	Levels []LevelView
}

// LevelView is one resolution as a uniform sequence, oldest first.
type LevelView struct {
	Width int64     // bucket width in ms
	Start int64     // unix ms: start of Y[0]
	Y     []float64 // bucket means, NaN where the bucket is empty
}

// Len is the number of composite points.
func (v *View) Len() int { return len(v.T) }

// Span is the time covered by the composite sequence in seconds, from the
// start of its oldest bucket to End; 0 when empty.
func (v *View) Span() float64 {
	if len(v.T) == 0 {
		return 0
	}
	return -v.T[0] + v.W[0]*3600/2
}
