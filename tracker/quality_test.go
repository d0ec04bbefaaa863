package tracker

import (
	"math"
	"math/rand/v2"
	"testing"
)

// TestNMIARIWorked checks a hand-worked example. a = {0,1,2 | 3,4,5},
// b = {0,1 | 2,3 | 4,5}, n = 6:
//
//	H(a) = ln 2, H(b) = ln 3, H(a,b) = (2/3) ln 3 + (1/3) ln 6,
//	I = H(a) + H(b) - H(a,b), NMI = 2I / (H(a) + H(b)) = 0.515803...
//	ARI: sum C(n_ij,2) = 2, sum C(a_i,2) = 6, sum C(b_j,2) = 3, C(6,2) = 15,
//	expected = 6*3/15 = 1.2, max = 4.5, ARI = 0.8 / 3.3 = 0.242424...
func TestNMIARIWorked(t *testing.T) {
	a := []int{0, 0, 0, 1, 1, 1}
	b := []int{7, 7, 9, 9, 8, 8}
	hab := (2.0/3)*math.Log(3) + (1.0/3)*math.Log(6)
	i := math.Log(2) + math.Log(3) - hab
	wantNMI := 2 * i / (math.Log(2) + math.Log(3))
	if got := NMI(a, b); math.Abs(got-wantNMI) > 1e-12 || math.Abs(got-0.515803) > 1e-6 {
		t.Fatalf("NMI %.9f, want %.9f", got, wantNMI)
	}
	if got := ARI(a, b); math.Abs(got-0.8/3.3) > 1e-12 {
		t.Fatalf("ARI %.9f, want %.9f", got, 0.8/3.3)
	}
}

// TestNMIARIProperties: both are 1 for the same partition under any
// relabelling and symmetric in their arguments (definitions: Danon et al.
// 2005; Hubert and Arabie 1985); ARI of independent random partitions is
// near 0 (its expectation is 0 by construction).
func TestNMIARIProperties(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	for trial := 0; trial < 50; trial++ {
		n := 2 + rng.IntN(500)
		a := make([]uint64, n)
		b := make([]uint64, n)
		perm := rng.Perm(n)
		for i := range a {
			a[i] = uint64(rng.IntN(1 + n/5))
			b[i] = uint64(perm[a[i]]) * 3
		}
		if NMI(a, b) < 1-1e-12 || ARI(a, b) < 1-1e-12 {
			t.Fatalf("relabelled copy: NMI %v ARI %v", NMI(a, b), ARI(a, b))
		}
		c := randomPartition(rng, n, 1+rng.IntN(10))
		if math.Abs(NMI(a, c)-NMI(c, a)) > 1e-12 || math.Abs(ARI(a, c)-ARI(c, a)) > 1e-12 {
			t.Fatal("not symmetric")
		}
	}
	x, y := randomPartition(rng, 20000, 10), randomPartition(rng, 20000, 10)
	if ari := ARI(x, y); math.Abs(ari) > 0.01 {
		t.Fatalf("ARI of independent partitions %v, want about 0", ari)
	}
}
