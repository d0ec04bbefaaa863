package gen

import "testing"

// Reference: a plain slice of counts with linear prefix sums and search.
func TestFenwickMatchesSlice(t *testing.T) {
	r := newRNG(13)
	for _, n := range []int{1, 2, 7, 64, 100} {
		f := newFenwick(n)
		ref := make([]int, n)
		for range 2000 {
			i := r.intn(n)
			d := r.intn(5)
			if r.intn(2) == 0 && ref[i] >= d {
				d = -d
			}
			f.add(i, d)
			ref[i] += d
			total := 0
			for j := range ref {
				if got := f.prefix(j); got != total {
					t.Fatalf("n=%d: prefix(%d) = %d, want %d", n, j, got, total)
				}
				total += ref[j]
			}
			if f.total != total {
				t.Fatalf("total = %d, want %d", f.total, total)
			}
			if total == 0 {
				continue
			}
			k := r.intn(total)
			want, acc := 0, 0
			for j, c := range ref {
				if acc+c > k {
					want = j
					break
				}
				acc += c
			}
			if got := f.find(k); got != want {
				t.Fatalf("n=%d: find(%d) = %d, want %d (counts %v)", n, k, got, want, ref)
			}
		}
	}
}
