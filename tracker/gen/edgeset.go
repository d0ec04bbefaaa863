package gen

// edgeKey packs an undirected pair into one word, smaller id high, so that
// sorting keys sorts edges by (U, V).
func edgeKey(u, v uint32) uint64 {
	if u > v {
		u, v = v, u
	}
	return uint64(u)<<32 | uint64(v)
}

// emptyKey marks a free slot. No edge has it: its U would be 2^32-1, but
// U < V <= 2^32-1.
const emptyKey = ^uint64(0)

// edgeSet is an open-addressing hash set of edge keys (linear probing,
// Fibonacci hashing, backward-shift deletion; Knuth, TAOCP vol. 3, 6.4,
// Algorithm R). A flat slice rather than a Go map: no per-entry allocation
// and nothing order-dependent. Not safe for concurrent use.
type edgeSet struct {
	slots []uint64
	shift uint8 // 64 - log2(len(slots))
	mask  uint64
}

// newEdgeSet returns an empty set sized for n keys at a load of at most 1/2.
func newEdgeSet(n int) *edgeSet {
	s := &edgeSet{}
	s.reset(n)
	return s
}

// reset empties the set and sizes it for n keys, reusing its memory when it
// is large enough. The cost is proportional to the new size, so a small
// scratch set can be reset cheaply for each community.
func (s *edgeSet) reset(n int) {
	bits := uint8(4)
	for 1<<bits < 2*n {
		bits++
	}
	size := 1 << bits
	if cap(s.slots) < size {
		s.slots = make([]uint64, size)
	}
	s.slots = s.slots[:size]
	for i := range s.slots {
		s.slots[i] = emptyKey
	}
	s.shift, s.mask = 64-bits, uint64(size-1)
}

func (s *edgeSet) home(k uint64) uint64 {
	return (k * 0x9e3779b97f4a7c15) >> s.shift
}

// has reports whether k is in the set.
func (s *edgeSet) has(k uint64) bool {
	for i := s.home(k); ; i = (i + 1) & s.mask {
		switch s.slots[i] {
		case k:
			return true
		case emptyKey:
			return false
		}
	}
}

// insert adds k and reports whether it was absent. The caller keeps the
// number of keys at most the n given to newEdgeSet.
func (s *edgeSet) insert(k uint64) bool {
	for i := s.home(k); ; i = (i + 1) & s.mask {
		switch s.slots[i] {
		case k:
			return false
		case emptyKey:
			s.slots[i] = k
			return true
		}
	}
}

// remove deletes k and reports whether it was present. The entries after it
// in its probe run are shifted back so that no tombstones are needed.
func (s *edgeSet) remove(k uint64) bool {
	i := s.home(k)
	for ; s.slots[i] != k; i = (i + 1) & s.mask {
		if s.slots[i] == emptyKey {
			return false
		}
	}
	for j := (i + 1) & s.mask; s.slots[j] != emptyKey; j = (j + 1) & s.mask {
		h := s.home(s.slots[j])
		// The entry at j may move back to the hole at i unless its home
		// lies cyclically in (i, j].
		if (i < j && i < h && h <= j) || (i > j && (h > i || h <= j)) {
			continue
		}
		s.slots[i] = s.slots[j]
		i = j
	}
	s.slots[i] = emptyKey
	return true
}
