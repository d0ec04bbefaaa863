package tracker

import (
	"math"
	"math/rand/v2"
	"testing"
)

// cpmByHand is the Constant Potts Model of Traag, Van Dooren and Nesterov
// 2011, H = sum over c of [ e_c - gamma n_c (n_c - 1) / 2 ], computed here
// from the edge list alone, independently of the tracker's code: e_c sums
// the edges (each once, a self-loop once) with both ends in c, n_c the node
// weights of c's members.
func cpmByHand(g *Graph, membership []uint64, weight func(uint32) float64, gamma float64) float64 {
	e := map[uint64]float64{}
	n := map[uint64]float64{}
	for i, c := range membership {
		if c != NoCommunity && g.Has(uint32(i)) {
			n[c] += weight(uint32(i))
		}
	}
	for _, ed := range g.EdgeList(nil) {
		if cu := membership[ed.U]; cu == membership[ed.V] {
			e[cu] += ed.W
		}
	}
	var h float64
	for c, nc := range n {
		h += e[c] - gamma*nc*(nc-1)/2
	}
	return h
}

// TestCPMValue: CPM of any labelling and the tracker's kept H equal the
// formula of the paper (cpmByHand) within 1e-9, after every batch of random
// change sequences (mixed ops, loops, node removals), with unit and with
// random node weights; the kept totals pass Check after every batch.
func TestCPMValue(t *testing.T) {
	sequences := 150
	if testing.Short() {
		sequences = 30
	}
	var total Result
	for seq := 0; seq < sequences; seq++ {
		rng := rand.New(rand.NewPCG(uint64(seq), 7))
		n := 10 + rng.IntN(80)
		g := randomGraph(rng, n, n+rng.IntN(3*n), seq%2 == 0)
		weighted := seq%3 == 0
		if weighted {
			for i := 0; i < n; i++ {
				g.SetNodeWeight(uint32(i), 0.5+2*rng.Float64())
			}
		}
		gamma := []float64{0.05, 0.3, 1}[seq%3]
		tr, err := NewFrom(g, &Options{Objective: ObjectiveCPM, Resolution: gamma, Seed: uint64(seq)})
		if err != nil {
			t.Fatal(err)
		}
		check := func(when string) {
			t.Helper()
			if err := tr.Check(); err != nil {
				t.Fatalf("seq %d %s: %v", seq, when, err)
			}
			m := tr.Membership(nil)
			want := cpmByHand(tr.Graph(), m, tr.Graph().NodeWeight, gamma)
			if h := tr.Quality(); math.Abs(h-want) > 1e-9*math.Max(1, math.Abs(want)) {
				t.Fatalf("seq %d %s: kept H %.12f, by hand %.12f", seq, when, h, want)
			}
			if h := CPM(tr.Graph(), m, gamma); math.Abs(h-want) > 1e-9*math.Max(1, math.Abs(want)) {
				t.Fatalf("seq %d %s: CPM() %.12f, by hand %.12f", seq, when, h, want)
			}
			r := randomPartition(rng, len(m), 1+rng.IntN(6))
			if h, want := CPM(tr.Graph(), r, gamma), cpmByHand(tr.Graph(), r, tr.Graph().NodeWeight, gamma); math.Abs(h-want) > 1e-9*math.Max(1, math.Abs(want)) {
				t.Fatalf("seq %d %s: CPM() of a random labelling %.12f, by hand %.12f", seq, when, h, want)
			}
		}
		check("after start")
		for batch := 0; batch < 12; batch++ {
			r, err := tr.Apply(randomBatch(rng, tr, n, 1+rng.IntN(15)))
			if err != nil {
				t.Fatal(err)
			}
			total.Moves += r.Moves
			total.Merges += r.Merges
			total.Splits += r.Splits
			check("after a batch")
		}
	}
	if total.Moves == 0 || total.Merges == 0 || total.Splits == 0 {
		t.Fatalf("sequences exercised moves %d, merges %d, splits %d", total.Moves, total.Merges, total.Splits)
	}
}

// TestCPMStaticQuality: a static CPM run's reported H equals the formula,
// and its modularity is Q at resolution 1 (gonum's community.Q).
func TestCPMStaticQuality(t *testing.T) {
	n, edges := readTSV(t, "football.tsv", false)
	g := NewGraph(n, edges)
	for _, gamma := range []float64{0.05, 0.2, 0.5} {
		p := Detect(g, &Options{Objective: ObjectiveCPM, Resolution: gamma})
		if want := cpmByHand(g, p.Membership, g.NodeWeight, gamma); math.Abs(p.Quality-want) > 1e-9*math.Abs(want) {
			t.Errorf("gamma %g: H %.12f, by hand %.12f", gamma, p.Quality, want)
		}
		if want := gonumQ(g, p.Membership, 1); math.Abs(p.Modularity-want) > 1e-9 {
			t.Errorf("gamma %g: modularity %.12f, gonum %.12f", gamma, p.Modularity, want)
		}
		// A community is kept only when it is denser than gamma: every
		// community of two or more members holds more than gamma times its
		// pairs (otherwise splitting it into singletons would raise H).
		for _, c := range p.Communities {
			if c.Size > 1 && c.Internal <= gamma*float64(c.Size*(c.Size-1))/2 {
				t.Errorf("gamma %g: community %d of %d members holds %v, not above gamma times its pairs", gamma, c.ID, c.Size, c.Internal)
			}
		}
	}
}
