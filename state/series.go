package state

// Series is the state of one series: its open buckets, its rings of closed
// buckets and what the pipeline remembers about it. A *Series is only valid
// inside the callback it is handed to, which runs under its partition lock.
//
// The header is 256 bytes. What a point that closes no bucket touches comes
// first and takes at most 120 bytes, so that it lies within one aligned
// 128-byte pair of cache lines, which processors fetch together, whether
// the chunk's array starts on a 128-byte boundary or 8 bytes after one (the
// runtime's header on small objects that hold pointers).
type Series struct {
	// Hot: read or written by every point.
	key       string
	clock     int64 // newest timestamp seen, unix ms
	first     int64 // number of the oldest open finest bucket
	base      float64
	points    uint64
	open      [openSlots]acc // open finest buckets, slot = number mod 4
	row       int32          // index in ch
	live      bool
	closedAny bool // some finest bucket has closed

	// Cold: touched when buckets close, on reads and by the pipeline.
	// Where each ring ends follows from first (see head), so it is not
	// stored.
	hash      uint64
	ch        *chunk
	coarse    [maxLevels - 1]acc // open accumulator of level l+1
	memo      Memo
	incidents []Incident
}

// acc accumulates points, or closed finest buckets, of one open bucket.
// Sum is of value minus the series base.
type acc struct {
	n, sum float64
}

// Key returns the canonical series key.
func (s *Series) Key() string { return s.key }

// Hash returns the FNV-1a hash of the key.
func (s *Series) Hash() uint64 { return s.hash }

// Newest returns the series clock: the newest timestamp it has seen, unix ms.
func (s *Series) Newest() int64 { return s.clock }

// Closed returns the end of the newest closed finest bucket in unix ms, or
// 0 while none has closed since the series appeared.
func (s *Series) Closed() int64 {
	if !s.closedAny {
		return 0
	}
	return s.first * s.ch.lay.width[0]
}

// Points returns how many points the series has accepted.
func (s *Series) Points() uint64 { return s.points }

// Memo returns what the pipeline remembers about the series, for reading
// and writing under the partition lock.
func (s *Series) Memo() *Memo { return &s.memo }

// Incident returns the incident of rule, appending a Quiet one if there is
// none and create is set; otherwise it returns nil when there is none. The
// pointer is valid until the next Incident or DropIncident call.
func (s *Series) Incident(rule uint16, create bool) *Incident {
	for i := range s.incidents {
		if s.incidents[i].Rule == rule {
			return &s.incidents[i]
		}
	}
	if !create {
		return nil
	}
	s.incidents = append(s.incidents, Incident{Rule: rule, Phase: Quiet})
	return &s.incidents[len(s.incidents)-1]
}

// Incidents returns the incidents of the series, for iteration and
// mutation by index.
func (s *Series) Incidents() []Incident { return s.incidents }

// DropIncident removes the incident of rule, if any, keeping the order of
// the others.
func (s *Series) DropIncident(rule uint16) {
	for i := range s.incidents {
		if s.incidents[i].Rule == rule {
			s.incidents = append(s.incidents[:i], s.incidents[i+1:]...)
			return
		}
	}
}

// head returns the number of the newest bucket that ring l accounts for.
// Every finest bucket before first has closed, and a coarser bucket closes
// with its last finest bucket, so ring l ends where first*width[0] rounds
// down to a bucket edge of level l.
func (s *Series) head(lay *layout, l int) int64 {
	return floorDiv(s.first*lay.width[0], lay.width[l]) - 1
}

// rows returns the series' bucket memory: a mean and a count per bucket,
// the levels one after the other.
func (s *Series) rows() ([]float32, []uint16) {
	nb := s.ch.lay.buckets
	lo := int(s.row) * nb
	return s.ch.mean[lo : lo+nb : lo+nb], s.ch.count[lo : lo+nb : lo+nb]
}
