package tracker

import (
	"math"
	"math/rand/v2"
	"slices"
	"testing"
)

// randomBatch returns a batch of mixed changes over node ids below n:
// additions (some of them new nodes), subtractions, sets, deletions of
// existing edges, self-loops and node removals.
func randomBatch(rng *rand.Rand, t *Tracker, n, size int) []Change {
	var b []Change
	g := t.Graph()
	existing := g.EdgeList(nil)
	for len(b) < size {
		u, v := uint32(rng.IntN(n)), uint32(rng.IntN(n))
		switch r := rng.IntN(20); {
		case r < 8:
			b = append(b, Change{Op: OpAdd, U: u, V: v, W: 0.5 + 3*rng.Float64()})
		case r < 12 && len(existing) > 0:
			e := existing[rng.IntN(len(existing))]
			b = append(b, Change{Op: OpDelete, U: e.U, V: e.V})
		case r < 14 && len(existing) > 0:
			e := existing[rng.IntN(len(existing))]
			b = append(b, Change{Op: OpAdd, U: e.U, V: e.V, W: -e.W * rng.Float64() * 1.2})
		case r < 16:
			b = append(b, Change{Op: OpSet, U: u, V: v, W: []float64{0, 1, 2.5}[rng.IntN(3)]})
		case r < 17:
			b = append(b, Change{Op: OpAdd, U: u, V: u, W: 1})
		case r < 18:
			b = append(b, Change{Op: OpRemoveNode, U: u})
		default:
			// Grow the id range now and then: a brand new node.
			b = append(b, Change{Op: OpAdd, U: uint32(n + rng.IntN(3)), V: v, W: 1})
		}
	}
	return b
}

// TestApplyBookkeeping: after every batch of a random sequence (mixed ops,
// node removal, re-adding removed nodes), the kept degrees, totals and
// internal weights equal a recomputation (Check), every community is
// connected, and Q from the kept totals equals gonum's community.Q on the
// same graph and partition (the outside reference for modularity).
func TestApplyBookkeeping(t *testing.T) {
	sequences := 200
	if testing.Short() {
		sequences = 40
	}
	var total Result
	for seq := 0; seq < sequences; seq++ {
		rng := rand.New(rand.NewPCG(uint64(seq), 99))
		n := 10 + rng.IntN(80)
		g := randomGraph(rng, n, n+rng.IntN(3*n), seq%2 == 0)
		gamma := []float64{0.5, 1, 2}[seq%3]
		tr, err := NewFrom(g, &Options{Resolution: gamma, Seed: uint64(seq)})
		if err != nil {
			t.Fatal(err)
		}
		if err := tr.Check(); err != nil {
			t.Fatalf("seq %d: after start: %v", seq, err)
		}
		for batch := 0; batch < 12; batch++ {
			b := randomBatch(rng, tr, n, 1+rng.IntN(15))
			r, err := tr.Apply(b)
			if err != nil {
				t.Fatalf("seq %d batch %d: %v", seq, batch, err)
			}
			total.Moves += r.Moves
			total.Merges += r.Merges
			total.Splits += r.Splits
			if err := tr.Check(); err != nil {
				t.Fatalf("seq %d batch %d: %v\nbatch: %v", seq, batch, err, b)
			}
			m := tr.Membership(nil)
			q := tr.Modularity()
			if want := gonumQ(tr.Graph(), m, gamma); math.Abs(q-want) > 1e-9 {
				t.Fatalf("seq %d batch %d: Q %.12f, gonum %.12f", seq, batch, q, want)
			}
		}
	}
	// The sequences must exercise every path of the re-optimisation.
	if total.Moves == 0 || total.Merges == 0 || total.Splits == 0 {
		t.Fatalf("sequences exercised moves %d, merges %d, splits %d", total.Moves, total.Merges, total.Splits)
	}
	t.Logf("moves %d, merges %d, splits %d", total.Moves, total.Merges, total.Splits)
}

// TestApplyDeterministic: the same start, batches and seed give the same
// partition and ids.
func TestApplyDeterministic(t *testing.T) {
	runOnce := func() ([]uint64, float64) {
		rng := rand.New(rand.NewPCG(1, 2))
		g := randomGraph(rng, 300, 1200, true)
		tr, err := NewFrom(g, &Options{Seed: 9})
		if err != nil {
			t.Fatal(err)
		}
		for i := 0; i < 30; i++ {
			if _, err := tr.Apply(randomBatch(rng, tr, 300, 20)); err != nil {
				t.Fatal(err)
			}
		}
		return tr.Membership(nil), tr.Modularity()
	}
	a, qa := runOnce()
	b, qb := runOnce()
	if !slices.Equal(a, b) || qa != qb {
		t.Fatal("two identical runs differ")
	}
}

// TestApplyRejectsBadChange: a bad change fails the batch before anything
// is applied.
func TestApplyRejectsBadChange(t *testing.T) {
	tr, _ := New(&Options{})
	_, err := tr.Apply([]Change{{Op: OpAdd, U: 0, V: 1, W: 1}, {Op: OpAdd, U: 1, V: 2, W: math.NaN()}})
	if err == nil || tr.Graph().Edges() != 0 {
		t.Fatalf("err %v, %d edges applied", err, tr.Graph().Edges())
	}
	_, err = tr.Apply([]Change{{Op: OpSet, U: 0, V: 1, W: -1}})
	if err == nil {
		t.Fatal("negative set accepted")
	}
}
