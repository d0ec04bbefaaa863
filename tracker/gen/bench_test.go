package gen

import (
	"fmt"
	"testing"
)

// Sizes of the static comparison of cmd/shoal-bench: 10^4 to 10^6 edges at
// <k> = 20, i.e. N = 10^3 to 10^5. LFR on the standard "S" community sizes
// at mu = 0.3; planted partition with groups of 50.

func BenchmarkLFR(b *testing.B) {
	for _, n := range []int{1000, 10000, 100000} {
		b.Run(fmt.Sprintf("edges=1e%d", digits(n*10)), func(b *testing.B) {
			o := LFROptions{N: n, AvgDegree: 20, MaxDegree: 50, MinCommunity: 10, MaxCommunity: 50, Mu: 0.3, Seed: 1}
			b.ReportAllocs()
			var edges int
			for b.Loop() {
				g, err := LFR(o)
				if err != nil {
					b.Fatal(err)
				}
				edges = len(g.Edges)
			}
			b.ReportMetric(float64(edges), "edges")
		})
	}
}

func BenchmarkPlanted(b *testing.B) {
	for _, n := range []int{1000, 10000, 100000} {
		b.Run(fmt.Sprintf("edges=1e%d", digits(n*10)), func(b *testing.B) {
			o := PlantedOptions{N: n, Groups: n / 50, AvgDegree: 20, Mu: 0.3, Seed: 1}
			b.ReportAllocs()
			var edges int
			for b.Loop() {
				g, err := Planted(o)
				if err != nil {
					b.Fatal(err)
				}
				edges = len(g.Edges)
			}
			b.ReportMetric(float64(edges), "edges")
		})
	}
}

// digits returns floor(log10(n)) for n >= 1.
func digits(n int) int {
	d := 0
	for n >= 10 {
		n /= 10
		d++
	}
	return d
}
