package gen

import (
	"slices"
	"testing"
)

// Pearson's chi-squared test of uniformity of intn(10): with 9 degrees of
// freedom the 0.1% critical value is 27.88 (standard chi-squared tables,
// e.g. NIST/SEMATECH e-Handbook, section 1.3.6.7.4). A biased or
// off-by-one intn fails it.
func TestIntnUniform(t *testing.T) {
	r := newRNG(1)
	const n, draws = 10, 100000
	var count [n]int
	for range draws {
		x := r.intn(n)
		if x < 0 || x >= n {
			t.Fatalf("intn(%d) = %d out of range", n, x)
		}
		count[x]++
	}
	chi2 := 0.0
	for _, c := range count {
		d := float64(c) - draws/n
		chi2 += d * d / (draws / n)
	}
	if chi2 > 27.88 {
		t.Errorf("chi2 = %.2f > 27.88 (df 9, p = 0.001); counts %v", chi2, count)
	}
	// A large bound that is not a power of two makes the rejection branch
	// likely; the result must still be in range.
	big := int(^uint(0)>>1) - 12345
	for range 1000 {
		if x := r.intn(big); x < 0 || x >= big {
			t.Fatalf("intn(%d) = %d out of range", big, x)
		}
	}
	for range 1000 {
		if f := r.float64(); f < 0 || f >= 1 {
			t.Fatalf("float64() = %v outside [0, 1)", f)
		}
	}
}

func TestPermIsPermutation(t *testing.T) {
	p := newRNG(3).perm(1000)
	s := slices.Clone(p)
	slices.Sort(s)
	for i, v := range s {
		if v != uint32(i) {
			t.Fatalf("perm is not a permutation of 0..999: sorted[%d] = %d", i, v)
		}
	}
	if slices.IsSorted(p) {
		t.Error("perm(1000) came back sorted")
	}
}
