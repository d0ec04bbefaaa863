package gen

import (
	"errors"
	"fmt"
	"math"
	"reflect"
	"slices"
	"strings"
	"testing"
)

// The four standard sets of Lancichinetti & Fortunato 2009 (PRE 80,
// 056117; SOURCES.md section 4): N = 1000 and 5000, <k> = 20, k_max = 50,
// tau1 = 2, tau2 = 1, sizes "S" 10..50 and "B" 20..100, mu = 0.1..0.8.
// Checks, from the definition of the benchmark in LFR 2008 (section II):
// realised mixing within 0.03 of mu, mean degree within 5% of <k>, no
// degree above k_max, community sizes in range and summing to N, and a
// simple graph. The tolerances are chosen. tau2 = 1 is the case networkx
// 3.6.1 cannot generate (SOURCES.md section 4).
func TestLFRStandardSets(t *testing.T) {
	type set struct {
		n, smin, smax int
		seeds         []uint64
	}
	sets := []set{
		{1000, 10, 50, []uint64{1, 2, 3}},
		{1000, 20, 100, []uint64{1}},
		{5000, 10, 50, []uint64{1}},
		{5000, 20, 100, []uint64{1}},
	}
	for _, s := range sets {
		for mu10 := 1; mu10 <= 8; mu10++ {
			mu := float64(mu10) / 10
			for _, seed := range s.seeds {
				name := fmt.Sprintf("N=%d/sizes=%d-%d/mu=%.1f/seed=%d", s.n, s.smin, s.smax, mu, seed)
				t.Run(name, func(t *testing.T) {
					o := LFROptions{N: s.n, AvgDegree: 20, MaxDegree: 50, Tau1: 2, Tau2: 1,
						MinCommunity: s.smin, MaxCommunity: s.smax, Mu: mu, Seed: seed}
					g, err := LFR(o)
					if err != nil {
						t.Fatal(err)
					}
					checkSimple(t, g)
					checkLFRShape(t, g, o)
				})
			}
		}
	}
}

func checkLFRShape(t *testing.T, g *Graph, o LFROptions) {
	t.Helper()
	t.Logf("mixing %.4f, mean degree %.3f, %d communities, %d edges", mixingRef(g), meanDegree(g), g.Communities(), len(g.Edges))
	if got := mixingRef(g); math.Abs(got-o.Mu) > 0.03 {
		t.Errorf("realised mixing %.4f, want %.2f within 0.03", got, o.Mu)
	}
	if got := meanDegree(g); math.Abs(got-o.AvgDegree) > 0.05*o.AvgDegree {
		t.Errorf("mean degree %.3f, want %g within 5%%", got, o.AvgDegree)
	}
	if got := slices.Max(degrees(g)); got > o.MaxDegree {
		t.Errorf("max degree %d > MaxDegree %d", got, o.MaxDegree)
	}
	sizes := communitySizes(g)
	sum := 0
	for c, s := range sizes {
		if s < o.MinCommunity || s > o.MaxCommunity {
			t.Errorf("community %d has %d nodes, outside [%d, %d]", c, s, o.MinCommunity, o.MaxCommunity)
		}
		sum += s
	}
	if sum != o.N {
		t.Errorf("community sizes sum to %d, want N = %d", sum, o.N)
	}
}

// Degree exponent. LFR 2008, section II: degrees follow a power law with
// exponent tau1 (their gamma). Two checks on N = 20000 nodes with a wide
// degree range (k_max = 200):
//   - the maximum-likelihood exponent of the degrees above k_min
//     (Clauset, Shalizi & Newman 2009; see fitPowerLaw) is within 0.1 of
//     tau1; its standard error here is about 0.02 (tau1 = 2) to 0.03;
//   - the ratio of nodes with degree in [a, 2a) to those in [2a, 4a),
//     a = k_min+1, is within 15% of the ratio of the power-law weights
//     sum k^-tau1 over the two bands.
//
// The lowest degree k_min is left out of both: it carries only a fraction
// of its power-law weight, to fit the mean (fitMean).
func TestLFRDegreeExponent(t *testing.T) {
	for _, tau := range []float64{2, 3} {
		o := LFROptions{N: 20000, AvgDegree: 10, MaxDegree: 200, Tau1: tau, Tau2: 1,
			MinCommunity: 20, MaxCommunity: 200, Mu: 0.3, Seed: 5}
		if tau == 3 {
			o.AvgDegree = 12
		}
		g, err := LFR(o)
		if err != nil {
			t.Fatal(err)
		}
		checkSimple(t, g)
		deg := degrees(g)
		kmin := slices.Min(deg)
		got, n := fitPowerLaw(deg, kmin+1, o.MaxDegree)
		t.Logf("tau1=%v: k_min=%d, fitted exponent %.3f over %d nodes", tau, kmin, got, n)
		if math.Abs(got-tau) > 0.1 {
			t.Errorf("tau1=%v: fitted degree exponent %.3f, want within 0.1", tau, got)
		}
		a := kmin + 1
		band := func(lo, hi int) (count int, weight float64) {
			for _, d := range deg {
				if d >= lo && d < hi {
					count++
				}
			}
			for k := lo; k < hi; k++ {
				weight += math.Pow(float64(k), -tau)
			}
			return count, weight
		}
		c1, w1 := band(a, 2*a)
		c2, w2 := band(2*a, 4*a)
		gotR, wantR := float64(c1)/float64(c2), w1/w2
		t.Logf("tau1=%v: nodes in [%d,%d) / [%d,%d) = %d/%d = %.3f, power law %.3f", tau, a, 2*a, 2*a, 4*a, c1, c2, gotR, wantR)
		if math.Abs(gotR/wantR-1) > 0.15 {
			t.Errorf("tau1=%v: band ratio %.3f, power law gives %.3f (tolerance 15%%)", tau, gotR, wantR)
		}
	}
}

// Community-size exponent, LFR 2008 section II (tau2, their beta). The
// maximum-likelihood exponent of the sizes must be within 0.25 of tau2; with
// 500 to 800 communities its standard error is about 0.07, and the trimming
// that makes the sizes sum to N moves a few sizes by one.
func TestLFRSizeExponent(t *testing.T) {
	for _, tau2 := range []float64{1, 2} {
		o := LFROptions{N: 40000, AvgDegree: 10, MaxDegree: 100, Tau1: 2, Tau2: tau2,
			MinCommunity: 20, MaxCommunity: 200, Mu: 0.4, Seed: 6}
		g, err := LFR(o)
		if err != nil {
			t.Fatal(err)
		}
		sizes := communitySizes(g)
		got, n := fitPowerLaw(sizes, o.MinCommunity, o.MaxCommunity)
		t.Logf("tau2=%v: fitted size exponent %.3f over %d communities", tau2, got, n)
		if math.Abs(got-tau2) > 0.25 {
			t.Errorf("tau2=%v: fitted size exponent %.3f, want within 0.25", tau2, got)
		}
	}
}

func TestLFRDeterminism(t *testing.T) {
	o := LFROptions{N: 3000, Mu: 0.4, Seed: 42}
	a, err := LFR(o)
	if err != nil {
		t.Fatal(err)
	}
	b, _ := LFR(o)
	if !reflect.DeepEqual(a, b) {
		t.Error("same options and seed gave different graphs")
	}
	o.Seed = 43
	c, _ := LFR(o)
	if reflect.DeepEqual(a.Edges, c.Edges) || reflect.DeepEqual(a.Membership, c.Membership) {
		t.Error("seeds 42 and 43 gave the same edges or the same membership")
	}
}

// Every internal degree round((1-mu)k) must fit its community: a node can
// only join a community larger than its internal degree (LFR 2008, section
// II). Checked on the realised graph: a node's internal edges are at most
// its community size - 1, and the realised internal degree is the planned
// one up to the parity and repair adjustments, so on average within 0.5.
func TestLFRInternalDegrees(t *testing.T) {
	o := LFROptions{N: 5000, Mu: 0.2, Seed: 8}
	g, err := LFR(o)
	if err != nil {
		t.Fatal(err)
	}
	sizes := communitySizes(g)
	in := make([]int, g.N)
	for _, e := range g.Edges {
		if g.Membership[e.U] == g.Membership[e.V] {
			in[e.U]++
			in[e.V]++
		}
	}
	deg := degrees(g)
	dev := 0.0
	for v := range g.N {
		if in[v] > sizes[g.Membership[v]]-1 {
			t.Fatalf("node %d has %d internal edges in a community of %d", v, in[v], sizes[g.Membership[v]])
		}
		dev += math.Abs(float64(in[v] - int(math.RoundToEven((1-o.Mu)*float64(deg[v])))))
	}
	if dev /= float64(g.N); dev > 0.5 {
		t.Errorf("mean |internal degree - round((1-mu)k)| = %.3f, want <= 0.5", dev)
	}
}

// Edge cases of mu: 1 means no internal edges at all, and a tiny mu with
// communities big enough for every internal degree gives almost none
// outside.
func TestLFRExtremeMu(t *testing.T) {
	g, err := LFR(LFROptions{Mu: 1, Seed: 3})
	if err != nil {
		t.Fatal(err)
	}
	checkSimple(t, g)
	if got := g.Mixing(); got != 1 {
		t.Errorf("Mu=1: mixing %v, want exactly 1", got)
	}
	g, err = LFR(LFROptions{Mu: 0, MaxCommunity: 100, MinCommunity: 60, Seed: 3})
	if err != nil {
		t.Fatal(err)
	}
	checkSimple(t, g)
	// Only internal edges that could not be placed turn external.
	if got := g.Mixing(); got > 0.01 {
		t.Errorf("Mu=0: mixing %v, want <= 0.01", got)
	}
}

// Random small options: whatever succeeds must be a simple graph of the
// documented shape; what fails must fail with one of the two sentinels.
func TestLFRRandomOptions(t *testing.T) {
	r := newRNG(99)
	ok := 0
	for i := range 200 {
		o := LFROptions{
			N:            20 + r.intn(400),
			MaxDegree:    2 + r.intn(30),
			Tau1:         1 + 2*r.float64(),
			Tau2:         0.5 + 2*r.float64(),
			MinCommunity: 1 + r.intn(20),
			Mu:           r.float64(),
			Seed:         uint64(i),
		}
		o.AvgDegree = 1 + r.float64()*float64(o.MaxDegree-1)
		o.MaxCommunity = o.MinCommunity + r.intn(60)
		g, err := LFR(o)
		if err != nil {
			if !errors.Is(err, ErrInvalidOptions) && !errors.Is(err, ErrInfeasible) {
				t.Fatalf("%+v: error %v wraps neither sentinel", o, err)
			}
			continue
		}
		ok++
		checkSimple(t, g)
		if got := slices.Max(degrees(g)); got > o.MaxDegree {
			t.Errorf("%+v: max degree %d", o, got)
		}
		sum := 0
		for _, s := range communitySizes(g) {
			if s < o.MinCommunity || s > o.MaxCommunity {
				t.Errorf("%+v: community of %d", o, s)
			}
			sum += s
		}
		if sum != o.N {
			t.Errorf("%+v: sizes sum to %d", o, sum)
		}
	}
	t.Logf("%d of 200 random option sets generated a graph", ok)
	if ok < 50 {
		t.Errorf("only %d of 200 random option sets generated a graph", ok)
	}
}

func TestLFRValidate(t *testing.T) {
	var zero LFROptions
	zero.EnsureDefaults()
	if err := zero.Validate(); err != nil {
		t.Errorf("defaults do not validate: %v", err)
	}
	for _, c := range []struct {
		name string
		o    LFROptions
		want []string // every one must appear in the message
	}{
		{"all at once", LFROptions{N: 1, AvgDegree: -1, MaxDegree: 0, Tau1: -2, Tau2: 11, MinCommunity: 0, MaxCommunity: 5, Mu: -0.1},
			[]string{"N = 1", "MaxDegree = 0", "AvgDegree = -1", "Tau1 = -2", "Tau2 = 11", "community sizes [0, 5]", "Mu = -0.1"}},
		{"avg above max", LFROptions{N: 100, AvgDegree: 30, MaxDegree: 20, Tau1: 2, Tau2: 1, MinCommunity: 10, MaxCommunity: 50, Mu: 0.5},
			[]string{"AvgDegree = 30"}},
		// Hand calculation: no m with 30m <= 55 <= 50m... m = 1 gives 55 > 50, m = 2 gives 60 > 55.
		{"sizes cannot sum", LFROptions{N: 55, AvgDegree: 5, MaxDegree: 10, Tau1: 2, Tau2: 1, MinCommunity: 30, MaxCommunity: 50, Mu: 0.5},
			[]string{"no number of communities"}},
		// round(0.9*50) = 45 needs a community of 46.
		{"kmax too big", LFROptions{N: 1000, AvgDegree: 20, MaxDegree: 50, Tau1: 2, Tau2: 1, MinCommunity: 10, MaxCommunity: 40, Mu: 0.1},
			[]string{"internal degree round((1-Mu)*50) = 45", "MaxCommunity >= 46"}},
		// The mean of k^-2 on [1, 50] is 2.77 (powerlaw_test.go).
		{"avg too low", LFROptions{N: 1000, AvgDegree: 2, MaxDegree: 50, Tau1: 2, Tau2: 1, MinCommunity: 10, MaxCommunity: 50, Mu: 0.5},
			[]string{"AvgDegree = 2 is below 2.77"}},
		{"one community", LFROptions{N: 100, AvgDegree: 5, MaxDegree: 10, Tau1: 2, Tau2: 1, MinCommunity: 60, MaxCommunity: 100, Mu: 0.5},
			[]string{"at least two communities"}},
	} {
		err := c.o.Validate()
		if !errors.Is(err, ErrInvalidOptions) {
			t.Errorf("%s: Validate = %v, want ErrInvalidOptions", c.name, err)
			continue
		}
		for _, w := range c.want {
			if !strings.Contains(err.Error(), w) {
				t.Errorf("%s: %q does not mention %q", c.name, err, w)
			}
		}
		if _, err := LFR(c.o); !errors.Is(err, ErrInvalidOptions) {
			t.Errorf("%s: LFR = %v, want ErrInvalidOptions", c.name, err)
		}
	}
}

// Valid options whose drawn sizes cannot hold the internal degrees: with
// tau2 = 10 nearly every community has 10 or 11 nodes (P(s) ~ s^-10 on
// [10, 50]: P(10) = 0.55, P(s >= 20) < 0.002, hand calculation), while at
// mu = 0.1 every node of degree >= 13 has internal degree >= 12 and those
// are about half the nodes (k_min about 10.6, tau1 = 2). Hall's condition
// fails and LFR must say so with ErrInfeasible.
func TestLFRInfeasible(t *testing.T) {
	_, err := LFR(LFROptions{N: 1000, Tau2: 10, Mu: 0.1, Seed: 1})
	if !errors.Is(err, ErrInfeasible) {
		t.Fatalf("LFR = %v, want ErrInfeasible", err)
	}
	t.Log(err)
	if !strings.Contains(err.Error(), "internal degree") {
		t.Errorf("error %q does not explain the cause", err)
	}
}
