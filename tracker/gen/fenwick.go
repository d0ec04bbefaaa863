package gen

// fenwick is a binary indexed tree of non-negative counts (Fenwick 1994,
// "A new data structure for cumulative frequency tables", Software:
// Practice and Experience 24(3)): point updates, prefix sums and the
// search for the position of the k-th unit, each in O(log n).
type fenwick struct {
	tree  []int // 1-based
	total int
}

func newFenwick(n int) fenwick { return fenwick{tree: make([]int, n+1)} }

// add adds d to the count at position i (0-based).
func (f *fenwick) add(i, d int) {
	f.total += d
	for i++; i < len(f.tree); i += i & -i {
		f.tree[i] += d
	}
}

// prefix returns the sum of the counts at positions 0..i-1.
func (f *fenwick) prefix(i int) int {
	s := 0
	for ; i > 0; i -= i & -i {
		s += f.tree[i]
	}
	return s
}

// find returns the position holding the k-th unit (0-based k < total): the
// least i with prefix(i+1) > k.
func (f *fenwick) find(k int) int {
	pos := 0
	step := 1
	for step*2 < len(f.tree) {
		step *= 2
	}
	for ; step > 0; step /= 2 {
		if next := pos + step; next < len(f.tree) && f.tree[next] <= k {
			pos = next
			k -= f.tree[next]
		}
	}
	// pos (1-based) is the last index with prefix(pos) <= k, so the unit is
	// at 1-based pos+1, 0-based pos.
	return pos
}
