package gen

import "testing"

// The set must behave like a Go map[uint64]bool under a random mix of
// inserts, removes and look-ups on a small key space (so that removals hit
// long probe runs and wrap around the table). Reference: the Go map.
func TestEdgeSetMatchesMap(t *testing.T) {
	r := newRNG(11)
	s := newEdgeSet(300)
	ref := map[uint64]bool{}
	for i := range 200000 {
		k := edgeKey(uint32(r.intn(40)), uint32(r.intn(40)))
		switch op := r.intn(3); {
		case op == 0 && len(ref) < 300:
			if got, want := s.insert(k), !ref[k]; got != want {
				t.Fatalf("op %d: insert(%x) = %v, want %v", i, k, got, want)
			}
			ref[k] = true
		case op == 1:
			if got, want := s.remove(k), ref[k]; got != want {
				t.Fatalf("op %d: remove(%x) = %v, want %v", i, k, got, want)
			}
			delete(ref, k)
		default:
			if got, want := s.has(k), ref[k]; got != want {
				t.Fatalf("op %d: has(%x) = %v, want %v", i, k, got, want)
			}
		}
	}
	for k := range ref {
		if !s.has(k) {
			t.Fatalf("lost key %x", k)
		}
	}
	s.reset(10)
	for k := range ref {
		if s.has(k) {
			t.Fatalf("key %x survived reset", k)
		}
	}
}

func TestEdgeKeyOrder(t *testing.T) {
	if edgeKey(5, 3) != edgeKey(3, 5) || edgeKey(3, 5) != 3<<32|5 {
		t.Errorf("edgeKey(5,3) = %x, want %x", edgeKey(5, 3), uint64(3<<32|5))
	}
	// (U, V) order is key order.
	if !(edgeKey(1, 1000) < edgeKey(2, 3)) {
		t.Error("edgeKey does not order by U first")
	}
}
