package gen

import (
	"slices"
	"testing"
)

// Reference: slices.Sort. Covers the digit-skipping path (edge keys of a
// small graph share most digits) and full 64-bit keys.
func TestSortKeys(t *testing.T) {
	r := newRNG(5)
	for _, n := range []int{0, 1, 10, 1023, 1024, 5000, 100000} {
		for _, full := range []bool{false, true} {
			keys := make([]uint64, n)
			for i := range keys {
				if full {
					keys[i] = r.src.Uint64()
				} else {
					keys[i] = edgeKey(uint32(r.intn(3000)), uint32(r.intn(3000)))
				}
			}
			want := slices.Clone(keys)
			slices.Sort(want)
			sortKeys(keys)
			if !slices.Equal(keys, want) {
				t.Errorf("n=%d full=%v: sortKeys differs from slices.Sort", n, full)
			}
		}
	}
}
