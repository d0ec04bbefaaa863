package gen

import (
	"errors"
	"slices"
	"testing"
)

// checkAssignment fails t unless every node is in exactly one community,
// every community has exactly its size in members, and every node's
// internal degree is below its community's size (LFR 2008, section II:
// "a node i can only be in a community whose size exceeds its internal
// degree").
func checkAssignment(t *testing.T, a *assignment, kin []int32, sizes []int) {
	t.Helper()
	seen := make([]bool, len(kin))
	for c, s := range sizes {
		m := a.membersOf(c)
		if len(m) != s {
			t.Fatalf("community %d has %d members, size %d", c, len(m), s)
		}
		for _, v := range m {
			if seen[v] {
				t.Fatalf("node %d placed twice", v)
			}
			seen[v] = true
			if int(kin[v]) >= s {
				t.Fatalf("node %d (internal degree %d) in community %d of size %d", v, kin[v], c, s)
			}
			if a.comm[v] != uint32(c) {
				t.Fatalf("comm[%d] = %d, want %d", v, a.comm[v], c)
			}
		}
	}
	for v, ok := range seen {
		if !ok {
			t.Fatalf("node %d not placed", v)
		}
	}
}

// A case with exactly one valid assignment (hand-made): sizes 2, 3, 4;
// four nodes of internal degree 3 fit only the community of 4, three of
// internal degree 2 then only the community of 3, and the two of internal
// degree 1 the community of 2. Both the paper's walk and the completion
// (walk of zero steps) must find it.
func TestAssignUnique(t *testing.T) {
	kin := []int32{1, 3, 2, 3, 1, 2, 3, 2, 3}
	sizes := []int{3, 2, 4}
	want := []uint32{1, 2, 0, 2, 1, 0, 2, 0, 2}
	for _, steps := range []int{0, 1, 5, 1000} {
		for seed := range uint64(20) {
			r := newRNG(seed)
			p, err := newPlacer(kin, sizes)
			if err != nil {
				t.Fatal(err)
			}
			if err := p.complete(r, p.walk(r, r.perm(len(kin)), steps)); err != nil {
				t.Fatalf("steps=%d seed=%d: %v", steps, seed, err)
			}
			a := p.result()
			checkAssignment(t, a, kin, sizes)
			if !slices.Equal(a.comm, want) {
				t.Fatalf("steps=%d seed=%d: comm %v, want %v", steps, seed, a.comm, want)
			}
		}
	}
}

// Augmenting paths (hand-made): three nodes of internal degree 0 already
// fill the only community big enough (size 3) for node 3 (internal degree
// 2); it can only get in if one of them moves to the free community of
// size 2, which node 4 then shares.
func TestAssignAugment(t *testing.T) {
	kin := []int32{0, 0, 0, 2, 0}
	sizes := []int{2, 3}
	p, err := newPlacer(kin, sizes)
	if err != nil {
		t.Fatal(err)
	}
	copy(p.a.members[p.a.off[1]:], []uint32{0, 1, 2})
	p.fill[1] = 3
	if err := p.complete(newRNG(1), []uint32{4, 3}); err != nil {
		t.Fatal(err)
	}
	a := p.result()
	checkAssignment(t, a, kin, sizes)
	if a.comm[3] != 1 || a.comm[4] != 0 {
		t.Errorf("comm = %v, want node 3 in 1 and node 4 in 0", a.comm)
	}
}

// Random instances that satisfy Hall's condition by construction (each
// node's internal degree is drawn below the size of a community it was
// first dealt to): every walk length, zero included, must end in a valid
// assignment. Instances violating it must give ErrInfeasible.
func TestAssignRandom(t *testing.T) {
	r := newRNG(77)
	for i := range 300 {
		nc := 1 + r.intn(8)
		sizes := make([]int, nc)
		var kin []int32
		for c := range sizes {
			sizes[c] = 1 + r.intn(12)
			for range sizes[c] {
				kin = append(kin, int32(r.intn(sizes[c])))
			}
		}
		// Shuffle kin so that node ids do not follow the dealing.
		for j := len(kin) - 1; j > 0; j-- {
			k := r.intn(j + 1)
			kin[j], kin[k] = kin[k], kin[j]
		}
		steps := []int{0, 1, len(kin), 8 * len(kin)}[i%4]
		p, err := newPlacer(kin, sizes)
		if err != nil {
			t.Fatalf("instance %d: %v (Hall holds by construction)", i, err)
		}
		if err := p.complete(r, p.walk(r, r.perm(len(kin)), steps)); err != nil {
			t.Fatalf("instance %d: %v", i, err)
		}
		checkAssignment(t, p.result(), kin, sizes)
	}
	// Communities of 3 and 1: three nodes of internal degree 2 fill the
	// community of 3 and a node of internal degree 0 the other; a fourth
	// node of internal degree 2 has nowhere to go.
	if _, err := newPlacer([]int32{2, 2, 2, 2}, []int{3, 1}); !errors.Is(err, ErrInfeasible) {
		t.Errorf("newPlacer on an impossible instance: %v, want ErrInfeasible", err)
	}
	if _, err := newPlacer([]int32{2, 2, 2, 0}, []int{3, 1}); err != nil {
		t.Errorf("newPlacer on a possible instance: %v", err)
	}
}
