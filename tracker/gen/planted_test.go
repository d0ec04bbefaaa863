package gen

import (
	"errors"
	"math"
	"reflect"
	"strings"
	"testing"
)

// Planted partition: realised mixing and mean degree against the options.
// The model (Condon & Karp 2001; the form with expected degree and mixing is
// that of the GN benchmark, Girvan & Newman 2002, PNAS 99:7821, and of LFR
// 2008) makes the expected degree AvgDegree and the expected fraction of
// external edges per node Mu. Chosen tolerances: mixing within
// 0.02, mean degree within 5%. With N = 10^4 and <k> = 20 the standard error
// of the mean degree is sqrt(20/10^4) = 0.045 (0.2%) and that of the mean
// mixing about 0.1/sqrt(10^4) = 0.001, so the tolerances only admit a wrong
// model, not bad luck.
func TestPlantedMixingAndDegree(t *testing.T) {
	for _, mu := range []float64{0, 0.1, 0.3, 0.5, 0.8} {
		for _, seed := range []uint64{1, 2} {
			g, err := Planted(PlantedOptions{N: 10000, Groups: 20, AvgDegree: 20, Mu: mu, Seed: seed})
			if err != nil {
				t.Fatal(err)
			}
			checkSimple(t, g)
			if got := mixingRef(g); math.Abs(got-mu) > 0.02 {
				t.Errorf("mu=%v seed=%d: realised mixing %.4f, want within 0.02", mu, seed, got)
			}
			if got := g.Mixing(); math.Abs(got-mixingRef(g)) > 1e-12 {
				t.Errorf("Graph.Mixing = %v, reference %v", got, mixingRef(g))
			}
			if got := meanDegree(g); math.Abs(got-20) > 0.05*20 {
				t.Errorf("mu=%v seed=%d: mean degree %.3f, want 20 within 5%%", mu, seed, got)
			}
			if mu == 0 && g.Mixing() != 0 {
				t.Errorf("mu=0: %v of edges leave their group", g.Mixing())
			}
		}
	}
}

// Group sizes differ by at most one and the first N mod Groups groups are
// the larger ones (PlantedOptions.Groups doc): 1000 = 334 + 333 + 333.
func TestPlantedGroupSizes(t *testing.T) {
	for _, c := range []struct {
		n, groups int
		want      []int
	}{
		{1000, 3, []int{334, 333, 333}},
		{1000, 10, []int{100, 100, 100, 100, 100, 100, 100, 100, 100, 100}},
		{10, 4, []int{3, 3, 2, 2}},
		{128, 4, []int{32, 32, 32, 32}}, // the GN benchmark shape
	} {
		g, err := Planted(PlantedOptions{N: c.n, Groups: c.groups, AvgDegree: 1, Mu: 0.1, Seed: 9})
		if err != nil {
			t.Fatal(err)
		}
		checkSimple(t, g)
		if got := communitySizes(g); !reflect.DeepEqual(got, c.want) {
			t.Errorf("N=%d Groups=%d: sizes %v, want %v", c.n, c.groups, got, c.want)
		}
	}
}

// Node ids are relabelled at random, so a group is not a block of
// consecutive ids: in a graph of 10 groups of 100, the first 100 ids
// should come from many groups (contiguous ids would give one).
func TestPlantedRelabelled(t *testing.T) {
	g, err := Planted(PlantedOptions{N: 1000, Groups: 10, Seed: 4})
	if err != nil {
		t.Fatal(err)
	}
	seen := map[uint32]bool{}
	for _, c := range g.Membership[:100] {
		seen[c] = true
	}
	if len(seen) < 8 {
		t.Errorf("the first 100 ids come from only %d of 10 groups", len(seen))
	}
}

// Density inside a group is p_in = (1-Mu) AvgDegree / (s-1): the GN
// benchmark shape (128 nodes, 4 groups of 32, degree 16; Girvan & Newman
// 2002) with Mu = 0.25 has z_in = 12, so p_in = 12/31. Summed over 20
// seeds the internal edge count is 20 * 4 * C(32,2) p_in = 15360 in
// expectation (standard deviation about 96, 0.6%); the tolerance is 2%,
// which p = z_in/s (a common slip, 3.2% fewer edges) would fail.
func TestPlantedInternalDensity(t *testing.T) {
	internal := 0
	for seed := range uint64(20) {
		g, err := Planted(PlantedOptions{N: 128, Groups: 4, AvgDegree: 16, Mu: 0.25, Seed: seed})
		if err != nil {
			t.Fatal(err)
		}
		for _, e := range g.Edges {
			if g.Membership[e.U] == g.Membership[e.V] {
				internal++
			}
		}
	}
	want := 20 * 4 * 32 * 31 / 2 * 12.0 / 31
	t.Logf("internal edges over 20 seeds: %d, expected %.0f", internal, want)
	if math.Abs(float64(internal)-want) > 0.02*want {
		t.Errorf("internal edges over 20 seeds = %d, want %.0f within 2%%", internal, want)
	}
}

func TestPlantedDeterminism(t *testing.T) {
	o := PlantedOptions{N: 2000, Groups: 8, AvgDegree: 12, Mu: 0.3, Seed: 42}
	a, err := Planted(o)
	if err != nil {
		t.Fatal(err)
	}
	b, _ := Planted(o)
	if !reflect.DeepEqual(a, b) {
		t.Error("same options and seed gave different graphs")
	}
	o.Seed = 43
	c, _ := Planted(o)
	if reflect.DeepEqual(a.Edges, c.Edges) || reflect.DeepEqual(a.Membership, c.Membership) {
		t.Error("seeds 42 and 43 gave the same edges or the same membership")
	}
}

func TestPlantedValidate(t *testing.T) {
	var zero PlantedOptions
	zero.EnsureDefaults()
	if err := zero.Validate(); err != nil {
		t.Errorf("defaults do not validate: %v", err)
	}
	for _, c := range []struct {
		name string
		o    PlantedOptions
		want []string // every one must appear in the message
	}{
		{"all at once", PlantedOptions{N: 1, Groups: -1, AvgDegree: math.NaN(), Mu: 1.5},
			[]string{"N = 1", "Groups = -1", "AvgDegree = NaN", "Mu = 1.5"}},
		{"groups > N", PlantedOptions{N: 10, Groups: 11, AvgDegree: 2}, []string{"Groups = 11"}},
		{"degree too high", PlantedOptions{N: 10, Groups: 2, AvgDegree: 10}, []string{"AvgDegree = 10"}},
		// (1-0.1)*20 = 18 > 9 = size 10 - 1.
		{"groups too small", PlantedOptions{N: 100, Groups: 10, AvgDegree: 20, Mu: 0.1}, []string{"smallest group size - 1 = 9"}},
		// Mu*k = 15 > the 10 nodes outside a group of 10.
		{"no room outside", PlantedOptions{N: 20, Groups: 2, AvgDegree: 15, Mu: 1}, []string{"outside the largest group"}},
		{"one group with mu", PlantedOptions{N: 20, Groups: 1, AvgDegree: 2, Mu: 0.5}, []string{"outside the largest group"}},
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
		if _, err := Planted(c.o); !errors.Is(err, ErrInvalidOptions) {
			t.Errorf("%s: Planted = %v, want ErrInvalidOptions", c.name, err)
		}
	}
}
