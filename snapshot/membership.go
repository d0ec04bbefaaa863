package snapshot

import "shoal/tracker"

// Membership returns the community id of every node id below n as the
// snapshot holds it, tracker.NoCommunity for nodes in no community (and
// members at or above n are left out): the form tracker.NewWithPartition
// takes.
func (s *Snapshot) Membership(n int) []uint64 {
	mem := make([]uint64, n)
	for i := range mem {
		mem[i] = tracker.NoCommunity
	}
	for _, c := range s.Communities {
		for _, m := range c.Members {
			if int(m) < n {
				mem[m] = c.ID
			}
		}
	}
	return mem
}
