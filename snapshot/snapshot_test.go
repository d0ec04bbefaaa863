package snapshot

import (
	"bufio"
	"errors"
	"math"
	"os"
	"strconv"
	"strings"
	"testing"

	"shoal/tracker"
)

type edge struct {
	u, v int
	w    float64
}

// bruteStats recomputes Internal and Degree of every community from an edge
// list, independently of any tracker code.
func bruteStats(edges []edge, membership []uint64) []tracker.CommunityStats {
	byID := map[uint64]*tracker.CommunityStats{}
	get := func(c uint64) *tracker.CommunityStats {
		if byID[c] == nil {
			byID[c] = &tracker.CommunityStats{ID: c}
		}
		return byID[c]
	}
	for _, c := range membership {
		if c != tracker.NoCommunity {
			get(c).Size++
		}
	}
	for _, e := range edges {
		cu, cv := membership[e.u], membership[e.v]
		get(cu).Degree += e.w
		get(cv).Degree += e.w
		if cu == cv {
			get(cu).Internal += e.w
		}
	}
	var out []tracker.CommunityStats
	for _, st := range byID {
		out = append(out, *st) // map order: Freeze must not care
	}
	return out
}

// TestFreezeTwoTriangles checks Freeze against a hand calculation.
// Graph: triangles {0,1,2} and {3,4,5} joined by the edge 2-3, all weights 1;
// node 6 is absent. m = 7. Community 10 = {0,1,2}: internal 3, degree 7,
// density 3/3 = 1, cut 7-6 = 1, conductance 1/min(7, 14-7) = 1/7. Community
// 20 = {3,4,5} is the same by symmetry.
func TestFreezeTwoTriangles(t *testing.T) {
	edges := []edge{{0, 1, 1}, {0, 2, 1}, {1, 2, 1}, {3, 4, 1}, {3, 5, 1}, {4, 5, 1}, {2, 3, 1}}
	membership := []uint64{10, 10, 10, 20, 20, 20, tracker.NoCommunity}
	s, err := Freeze(Header{ID: 1, Graph: "g", Edges: 7, Nodes: 99}, membership, bruteStats(edges, membership))
	if err != nil {
		t.Fatal(err)
	}
	if s.Nodes != 6 || s.Header.Communities != 2 || s.TotalWeight != 7 {
		t.Fatalf("header %+v: want 6 nodes, 2 communities, total weight 7", s.Header)
	}
	want := []Community{
		{ID: 10, Size: 3, Internal: 3, Degree: 7, Density: 1, Conductance: 1.0 / 7, Members: []uint32{0, 1, 2}},
		{ID: 20, Size: 3, Internal: 3, Degree: 7, Density: 1, Conductance: 1.0 / 7, Members: []uint32{3, 4, 5}},
	}
	for i, c := range s.Communities {
		w := want[i]
		if c.ID != w.ID || c.Size != w.Size || c.Internal != w.Internal || c.Degree != w.Degree ||
			math.Abs(c.Density-w.Density) > 1e-12 || math.Abs(c.Conductance-w.Conductance) > 1e-12 ||
			!equalU32(c.Members, w.Members) {
			t.Errorf("community %d: got %+v, want %+v", i, c, w)
		}
	}
}

func equalU32(a, b []uint32) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i] != b[i] {
			return false
		}
	}
	return true
}

func readTSV(t *testing.T, path string) [][]string {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	var rows [][]string
	sc := bufio.NewScanner(f)
	for sc.Scan() {
		if line := sc.Text(); line != "" && !strings.HasPrefix(line, "#") {
			rows = append(rows, strings.Fields(line))
		}
	}
	if err := sc.Err(); err != nil {
		t.Fatal(err)
	}
	return rows
}

func atoi(t *testing.T, s string) int {
	t.Helper()
	n, err := strconv.Atoi(s)
	if err != nil {
		t.Fatal(err)
	}
	return n
}

// TestFreezeKarate freezes Zachary's karate club (testdata/karate.tsv,
// unweighted) under its optimal 4-community partition
// (testdata/karate_optimal_partition.tsv) with statistics recomputed by brute
// force from the edge list, then checks:
//   - modularity from the frozen statistics, sum_c [Internal/m - (Degree/2m)^2],
//     equals the published optimum 0.4197896 (Brandes et al. 2008; Aloise et
//     al. 2010; see testdata/SOURCES.md);
//   - Density and Conductance against a direct recount over the edge list
//     (member pairs and cut edges counted edge by edge, not from Degree).
func TestFreezeKarate(t *testing.T) {
	var edges []edge
	n := 0
	for _, r := range readTSV(t, "../testdata/karate.tsv") {
		e := edge{atoi(t, r[0]), atoi(t, r[1]), 1}
		edges = append(edges, e)
		n = max(n, e.u+1, e.v+1)
	}
	membership := make([]uint64, n)
	for _, r := range readTSV(t, "../testdata/karate_optimal_partition.tsv") {
		// Shift ids so that they are not the dense 0..3 (ids are opaque).
		membership[atoi(t, r[0])] = uint64(1000 + 7*atoi(t, r[1]))
	}
	s, err := Freeze(Header{ID: 3}, membership, bruteStats(edges, membership))
	if err != nil {
		t.Fatal(err)
	}
	if len(edges) != 78 || s.TotalWeight != 78 || s.Nodes != 34 || len(s.Communities) != 4 {
		t.Fatalf("karate: %d edges, header %+v; want 78 edges, m=78, 34 nodes, 4 communities", len(edges), s.Header)
	}
	q := 0.0
	for _, c := range s.Communities {
		q += c.Internal/s.TotalWeight - math.Pow(c.Degree/(2*s.TotalWeight), 2)
	}
	if math.Abs(q-0.4197896) > 1e-6 {
		t.Errorf("modularity from frozen stats = %.7f, published optimum 0.4197896", q)
	}
	for _, c := range s.Communities {
		in := map[uint32]bool{}
		for _, v := range c.Members {
			in[v] = true
		}
		var inside, cut, vol float64
		for _, e := range edges {
			a, b := in[uint32(e.u)], in[uint32(e.v)]
			if a && b {
				inside++
			}
			if a != b {
				cut++
			}
			if a {
				vol++
			}
			if b {
				vol++
			}
		}
		pairs := float64(c.Size*(c.Size-1)) / 2
		wantDensity := inside / pairs
		wantCond := cut / math.Min(vol, 2*78-vol)
		if math.Abs(c.Density-wantDensity) > 1e-12 || math.Abs(c.Conductance-wantCond) > 1e-12 {
			t.Errorf("community %d: density %v conductance %v, recount gives %v and %v",
				c.ID, c.Density, c.Conductance, wantDensity, wantCond)
		}
		for i := 1; i < len(c.Members); i++ {
			if c.Members[i] <= c.Members[i-1] {
				t.Errorf("community %d: members not sorted: %v", c.ID, c.Members)
			}
		}
	}
	for i := 1; i < len(s.Communities); i++ {
		if s.Communities[i].ID <= s.Communities[i-1].ID {
			t.Errorf("communities not sorted by id")
		}
	}
}

// TestFreezeEdgeCases: a singleton has density 0; a community holding all the
// weight has denominator 2m - vol = 0 and conductance 0; statistics of an empty
// community are skipped.
func TestFreezeEdgeCases(t *testing.T) {
	membership := []uint64{5, 5, 9}
	stats := []tracker.CommunityStats{
		{ID: 9, Size: 1, Internal: 0, Degree: 0},
		{ID: 5, Size: 2, Internal: 2.5, Degree: 5},
		{ID: 7, Size: 0},
	}
	s, err := Freeze(Header{}, membership, stats)
	if err != nil {
		t.Fatal(err)
	}
	if len(s.Communities) != 2 || s.Communities[0].ID != 5 || s.Communities[1].ID != 9 {
		t.Fatalf("communities %+v: want ids 5 and 9", s.Communities)
	}
	// Size 2, internal 2.5: density 2.5/1; all weight inside: conductance 0.
	if c := s.Communities[0]; c.Density != 2.5 || c.Conductance != 0 {
		t.Errorf("community 5: density %v conductance %v, want 2.5 and 0", c.Density, c.Conductance)
	}
	if c := s.Communities[1]; c.Density != 0 || c.Conductance != 0 {
		t.Errorf("singleton: density %v conductance %v, want 0 and 0", c.Density, c.Conductance)
	}
}

func TestFreezeErrors(t *testing.T) {
	nan := math.NaN()
	for _, tc := range []struct {
		name  string
		m     []uint64
		stats []tracker.CommunityStats
	}{
		{"no stats for a community", []uint64{1, 2}, []tracker.CommunityStats{{ID: 1, Size: 1}}},
		{"size mismatch", []uint64{1, 1}, []tracker.CommunityStats{{ID: 1, Size: 3}}},
		{"missing members", []uint64{1}, []tracker.CommunityStats{{ID: 1, Size: 1}, {ID: 2, Size: 1}}},
		{"duplicate stats", []uint64{1}, []tracker.CommunityStats{{ID: 1, Size: 1}, {ID: 1, Size: 1}}},
		{"NaN internal", []uint64{1}, []tracker.CommunityStats{{ID: 1, Size: 1, Internal: nan}}},
		{"negative degree", []uint64{1}, []tracker.CommunityStats{{ID: 1, Size: 1, Degree: -1}}},
		{"reserved id", []uint64{tracker.NoCommunity}, []tracker.CommunityStats{{ID: tracker.NoCommunity, Size: 1}}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			if _, err := Freeze(Header{}, tc.m, tc.stats); !errors.Is(err, ErrInvalid) {
				t.Errorf("err = %v, want ErrInvalid", err)
			}
		})
	}
}

// TestIDIndex checks the flat hash against a Go map on random keys.
func TestIDIndex(t *testing.T) {
	ref := map[uint64]int32{}
	x := newIDIndex(5000)
	seed := uint64(1)
	for i := int32(0); i < 5000; i++ {
		seed = seed*6364136223846793005 + 1442695040888963407
		k := seed >> (i % 60) // many small and large keys
		_, dup := ref[k]
		if x.insert(k, i) == dup {
			t.Fatalf("insert %d: dup=%v disagrees", k, dup)
		}
		if !dup {
			ref[k] = i
		}
	}
	for k, v := range ref {
		if got := x.get(k); got != v {
			t.Fatalf("get(%d) = %d, want %d", k, got, v)
		}
	}
	for k := uint64(0); k < 1000; k++ {
		if _, ok := ref[k]; !ok && x.get(k) != -1 {
			t.Fatalf("absent key %d found", k)
		}
	}
}

// TestFreezeAllocs pins Freeze's allocation count: a fixed number of flat
// slices whatever the size (no per-node or per-community allocation).
func TestFreezeAllocs(t *testing.T) {
	for _, n := range []int{100, 10000} {
		membership := make([]uint64, n)
		var stats []tracker.CommunityStats
		for c := 0; c < n/10; c++ {
			stats = append(stats, tracker.CommunityStats{ID: uint64(3 * c), Size: 10, Degree: 1})
			for v := c * 10; v < c*10+10; v++ {
				membership[v] = uint64(3 * c)
			}
		}
		allocs := testing.AllocsPerRun(5, func() {
			if _, err := Freeze(Header{}, membership, stats); err != nil {
				t.Fatal(err)
			}
		})
		if allocs > 10 {
			t.Errorf("n=%d: %v allocations, budget 10", n, allocs)
		}
	}
}
