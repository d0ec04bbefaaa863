package snapshot

import (
	"testing"

	"shoal/tracker"
)

// TestMembership: Membership inverts Freeze for the nodes below n.
func TestMembership(t *testing.T) {
	in := []uint64{7, 7, tracker.NoCommunity, 9, 7, 9}
	s, err := Freeze(Header{ID: 1, Graph: "g"}, in, []tracker.CommunityStats{{ID: 7, Size: 3, Degree: 3}, {ID: 9, Size: 2, Degree: 2}})
	if err != nil {
		t.Fatal(err)
	}
	got := s.Membership(len(in))
	for i := range in {
		if got[i] != in[i] {
			t.Fatalf("node %d: %d, want %d", i, got[i], in[i])
		}
	}
	if short := s.Membership(4); len(short) != 4 || short[3] != 9 {
		t.Fatalf("Membership(4) = %v", short)
	}
	if long := s.Membership(8); long[7] != tracker.NoCommunity {
		t.Fatalf("Membership(8) = %v", long)
	}
}
