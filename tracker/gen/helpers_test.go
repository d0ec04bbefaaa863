package gen

import (
	"math"
	"testing"
)

// checkSimple fails t unless g has the shape Graph documents: ids in
// [0, N), U < V (so no self-loops), strictly increasing (U, V) order (so no
// duplicates), weight 1, one community per node and every community id in
// 0..K-1 used.
func checkSimple(t *testing.T, g *Graph) {
	t.Helper()
	if len(g.Membership) != g.N {
		t.Fatalf("len(Membership) = %d, N = %d", len(g.Membership), g.N)
	}
	for i, e := range g.Edges {
		if e.U >= e.V || int(e.V) >= g.N || e.W != 1 {
			t.Fatalf("edge %d = %+v: want U < V < N = %d and W = 1", i, e, g.N)
		}
		if i > 0 {
			p := g.Edges[i-1]
			if p.U > e.U || (p.U == e.U && p.V >= e.V) {
				t.Fatalf("edges %d, %d = %+v, %+v: not strictly increasing (unsorted or duplicate)", i-1, i, p, e)
			}
		}
	}
	sizes := communitySizes(g)
	for c, s := range sizes {
		if s == 0 {
			t.Fatalf("community %d of 0..%d is empty", c, len(sizes)-1)
		}
	}
}

func communitySizes(g *Graph) []int {
	sizes := make([]int, g.Communities())
	for _, c := range g.Membership {
		sizes[c]++
	}
	return sizes
}

func degrees(g *Graph) []int {
	d := make([]int, g.N)
	for _, e := range g.Edges {
		d[e.U]++
		d[e.V]++
	}
	return d
}

func meanDegree(g *Graph) float64 { return 2 * float64(len(g.Edges)) / float64(g.N) }

// mixingRef recomputes the realised mixing by its definition in LFR 2008
// (section II: "each node shares a fraction 1-mu of its links with the
// other nodes of its community and a fraction mu with the other nodes of
// the network"), independently of Graph.Mixing: per node, external degree
// over degree, averaged over nodes with edges.
func mixingRef(g *Graph) float64 {
	type acc struct{ in, out int }
	a := make([]acc, g.N)
	for _, e := range g.Edges {
		if g.Membership[e.U] == g.Membership[e.V] {
			a[e.U].in++
			a[e.V].in++
		} else {
			a[e.U].out++
			a[e.V].out++
		}
	}
	sum, n := 0.0, 0
	for _, x := range a {
		if x.in+x.out > 0 {
			sum += float64(x.out) / float64(x.in+x.out)
			n++
		}
	}
	return sum / float64(n)
}

// fitPowerLaw returns the maximum-likelihood exponent tau of a discrete
// power law P(x) ~ x^-tau truncated to [lo, hi], fitted to the samples in
// that range: the tau at which the model mean of ln x equals the sample
// mean (the likelihood equation of Clauset, Shalizi & Newman 2009, SIAM
// Review 51, 661, section 3, with an upper cut-off added). Bisection; math.Pow
// as the independent reference for the weights.
func fitPowerLaw(xs []int, lo, hi int) (tau float64, n int) {
	sumLn := 0.0
	for _, x := range xs {
		if x >= lo && x <= hi {
			sumLn += math.Log(float64(x))
			n++
		}
	}
	target := sumLn / float64(n)
	modelMeanLn := func(tau float64) float64 {
		z, s := 0.0, 0.0
		for k := lo; k <= hi; k++ {
			w := math.Pow(float64(k), -tau)
			z += w
			s += w * math.Log(float64(k))
		}
		return s / z
	}
	a, b := -5.0, 15.0 // modelMeanLn decreases in tau
	for range 100 {
		m := (a + b) / 2
		if modelMeanLn(m) > target {
			a = m
		} else {
			b = m
		}
	}
	return (a + b) / 2, n
}
