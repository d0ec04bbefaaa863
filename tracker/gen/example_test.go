package gen_test

import (
	"fmt"
	"os"

	"shoal/tracker/gen"
)

// A planted partition of the Girvan-Newman shape (Girvan & Newman 2002: 128
// nodes, 4 groups of 32, expected degree 16) with a quarter of the edges
// leaving their group.
func ExamplePlanted() {
	g, err := gen.Planted(gen.PlantedOptions{N: 128, Groups: 4, AvgDegree: 16, Mu: 0.25, Seed: 1})
	if err != nil {
		fmt.Println(err)
		return
	}
	sizes := make([]int, g.Communities())
	for _, c := range g.Membership {
		sizes[c]++
	}
	fmt.Println("group sizes:", sizes)
	// Output:
	// group sizes: [32 32 32 32]
}

// An LFR graph of the standard "S" set (the defaults) at mu = 0.5, written
// to a tab-separated edge-list file.
func ExampleLFR() {
	g, err := gen.LFR(gen.LFROptions{Mu: 0.5, Seed: 1})
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("nodes %d, mixing within 0.03 of 0.5: %v\n", g.N, g.Mixing() > 0.47 && g.Mixing() < 0.53)
	f, err := os.CreateTemp("", "lfr-*.tsv")
	if err != nil {
		fmt.Println(err)
		return
	}
	defer os.Remove(f.Name())
	defer f.Close()
	if err := gen.WriteEdgeList(f, g); err != nil {
		fmt.Println(err)
	}
	// Output:
	// nodes 1000, mixing within 0.03 of 0.5: true
}

// Invalid options are reported all at once.
func ExampleLFROptions_Validate() {
	o := gen.LFROptions{N: 1, AvgDegree: 20, MaxDegree: 50, Tau1: 2, Tau2: 1, MinCommunity: 10, MaxCommunity: 50, Mu: 1.5}
	fmt.Println(o.Validate())
	// Output:
	// gen: invalid options: lfr: N = 1, must be in [2, 1073741824]; Mu = 1.5, must be in [0, 1]
}
