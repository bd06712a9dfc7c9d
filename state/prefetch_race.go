//go:build race

package state

// prefetch does nothing in race builds: the passes in prefetch.go read
// without locks on purpose, which the race detector would report, and
// results never depend on them.
func (s *Store) prefetch(es []Entry, h *hints) {}
