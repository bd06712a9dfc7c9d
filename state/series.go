package state

// Series is the state of one series: its open buckets, its rings of closed
// buckets and what the pipeline remembers about it. A *Series is only valid
// inside the callback it is handed to, which runs under its partition lock.
//
// What every point touches is in the series' hot record (see hot.go), what
// a point closing buckets touches in the header of its block (block.go);
// the Series itself is the cold record, read by views and the pipeline.
type Series struct {
	row  int32 // index in ch
	live bool
	ch   *chunk
	key  string
	// born is the oldest open finest bucket when the series was created:
	// some bucket has closed once the oldest open one is later.
	born      int64
	memo      Memo
	incidents []Incident
}

// acc accumulates points, or closed finest buckets, of one open bucket.
// Sum is of value minus the series base.
type acc struct {
	n, sum float64
}

func (s *Series) hot() *hot { return &s.ch.hot[s.row] }

// Key returns the canonical series key.
func (s *Series) Key() string { return s.key }

// Hash returns the FNV-1a hash of the key.
func (s *Series) Hash() uint64 { return s.hot().hash }

// Newest returns the series clock: the newest timestamp it has seen, unix ms.
func (s *Series) Newest() int64 { return s.hot().clock }

// Closed returns the end of the newest closed finest bucket in unix ms, or
// 0 while none has closed since the series appeared.
func (s *Series) Closed() int64 {
	if f := s.hot().first; f > s.born {
		return f * s.ch.lay.width[0]
	}
	return 0
}

// Points returns how many points the series has accepted.
func (s *Series) Points() uint64 {
	h := s.hot()
	n := s.ch.block(int(s.row)).header().points + uint64(h.n[0]) + uint64(h.n[1])
	for _, x := range s.ch.extraOf(int(s.row)) {
		n += uint64(x.n)
	}
	return n
}

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

// head returns the number of the newest bucket that ring l accounts for
// while first is the oldest open finest bucket. Every finest bucket before
// first has closed, and a coarser bucket closes with its last finest
// bucket, so ring l ends where first*width[0] rounds down to a bucket edge
// of level l.
func head(lay *layout, first int64, l int) int64 {
	return floorDiv(first*lay.width[0], lay.width[l]) - 1
}

// block returns the bucket memory of the series in row.
func (c *chunk) block(row int) block {
	nb := c.lay.blockBytes
	return block(c.blocks[row*nb : (row+1)*nb : (row+1)*nb])
}

// extraOf returns open slots 2 and 3 of the series in row, or nil when the
// layout needs only two.
func (c *chunk) extraOf(row int) []extraSlot {
	if c.extra == nil {
		return nil
	}
	return c.extra[2*row : 2*row+2 : 2*row+2]
}

// slot returns the count and sum of open finest bucket b of the series in
// row.
func (c *chunk) slot(row int, b int64) (*uint32, *float64) {
	if c.extra == nil {
		h := &c.hot[row]
		return &h.n[b&1], &h.sum[b&1]
	}
	j := int(b & (openSlots - 1))
	if j < 2 {
		h := &c.hot[row]
		return &h.n[j], &h.sum[j]
	}
	x := &c.extra[2*row+j-2]
	return &x.n, &x.sum
}
