package main

import "testing"

// TestRecoveredShare: the recovery rule of `shoal-bench refs`, a planted
// group counts when one found community has Jaccard similarity |P ∩ F| /
// |P ∪ F| >= 0.8 with it (Jaccard 1901; the 0.8 threshold is our choice),
// on hand-made partitions whose Jaccard values are worked out in the
// comments.
func TestRecoveredShare(t *testing.T) {
	rep := func(labels ...uint32) []uint32 { // labels[i] repeated 10 times
		var out []uint32
		for _, l := range labels {
			for range 10 {
				out = append(out, l)
			}
		}
		return out
	}
	planted := rep(0, 1, 2, 3) // four groups of 10
	for _, c := range []struct {
		name  string
		found []uint32
		want  float64
	}{
		{"identical, other labels", rep(7, 5, 9, 8), 1},
		// Groups 0 and 1 in one community of 20: J = 10/20 = 0.5 each.
		{"two merged", rep(4, 4, 2, 3), 0.5},
		{"all in one", rep(0, 0, 0, 0), 0},
		{"singletons", func() []uint32 {
			s := make([]uint32, 40)
			for i := range s {
				s[i] = uint32(i)
			}
			return s
		}(), 0},
	} {
		if got := recoveredShare(planted, c.found); got != c.want {
			t.Errorf("%s: recovered %v, want %v", c.name, got, c.want)
		}
	}
	// Group 0 split 8 + 2: J = 8/10 = 0.8, recovered. Group 1 split 7 + 3:
	// J = 0.7, not. Group 2 joined by 2 nodes of group 3: J = 10/12 =
	// 0.83, recovered; group 3 keeps 8 of its 10 alone: J = 0.8, recovered.
	found := rep(0, 1, 2, 3)
	found[8], found[9] = 10, 10
	found[17], found[18], found[19] = 11, 11, 11
	found[30], found[31] = 2, 2
	if got, want := recoveredShare(planted, found), 0.75; got != want {
		t.Errorf("split and joined groups: recovered %v, want %v", got, want)
	}
}

// TestMedian: the middle value, or the mean of the two middle values.
func TestMedian(t *testing.T) {
	if m := median([]float64{3, 1, 2}); m != 2 {
		t.Errorf("median of 3, 1, 2 = %v", m)
	}
	if m := median([]float64{4, 1, 3, 2}); m != 2.5 {
		t.Errorf("median of 4, 1, 3, 2 = %v", m)
	}
}
