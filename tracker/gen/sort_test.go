package gen

import (
	"slices"
	"testing"
)

// Reference: slices.Sort. Graph sizes from 2 nodes (one bit per id) to
// 2^30 (the largest N), key counts on both sides of the small-input cut-off,
// and a narrow id range that leaves whole digits constant (skipped passes).
func TestSortKeys(t *testing.T) {
	r := newRNG(5)
	for _, nodes := range []int{2, 3, 1000, 3000, 1 << 17, maxNodes} {
		for _, count := range []int{0, 1, 10, 1023, 1024, 5000, 100000} {
			for _, narrow := range []bool{false, true} {
				span := nodes
				if narrow {
					span = min(nodes, 40)
				}
				keys := make([]uint64, count)
				for i := range keys {
					keys[i] = edgeKey(uint32(r.intn(span)), uint32(r.intn(span)))
				}
				want := slices.Clone(keys)
				slices.Sort(want)
				sortKeys(keys, nodes)
				if !slices.Equal(keys, want) {
					t.Errorf("nodes=%d count=%d narrow=%v: sortKeys differs from slices.Sort", nodes, count, narrow)
				}
			}
		}
	}
}
