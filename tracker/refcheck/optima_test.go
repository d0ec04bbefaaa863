package refcheck

import (
	"bufio"
	"encoding/json"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"shoal/tracker"
)

// bestModularity runs leidenalg's ModularityVertexPartition (Traag,
// Waltman and van Eck 2019) on an unweighted edge list for seeds 0..N-1,
// each until an iteration no longer improves (n_iterations=-1), and prints
// the best Q, how many seeds reached it, its membership, and igraph's own
// modularity of that membership.
const bestModularity = `
import json, sys
import igraph, leidenalg
edges = []
for line in open(sys.argv[1]):
    f = line.split()
    if not f or f[0].startswith("#"):
        continue
    edges.append((int(f[0]), int(f[1])))  # columns after the second (weights) ignored
g = igraph.Graph(n=max(max(e) for e in edges) + 1, edges=edges)
best, at, qs = None, 0, []
for seed in range(int(sys.argv[2])):
    p = leidenalg.find_partition(g, leidenalg.ModularityVertexPartition, n_iterations=-1, seed=seed)
    q = p.modularity
    if best is None or q > best.modularity + 1e-12:
        best, at = p, 0
    if abs(q - best.modularity) <= 1e-12:
        at += 1
print(json.dumps({"q": best.modularity, "at_best": at, "membership": best.membership,
                  "igraph_q": g.modularity(best.membership), "nodes": g.vcount(), "edges": g.ecount(),
                  "versions": [igraph.__version__, leidenalg.version]}))
`

// refPython finds a python3 that imports igraph and leidenalg: Debian's
// /usr/bin/python3 first (python3-igraph, python3-leidenalg install there),
// then python3 on PATH.
func refPython(t *testing.T) string {
	t.Helper()
	cands := []string{"/usr/bin/python3"}
	if p, err := exec.LookPath("python3"); err == nil && p != cands[0] {
		cands = append(cands, p)
	}
	for _, c := range cands {
		if exec.Command(c, "-c", "import igraph, leidenalg").Run() == nil {
			return c
		}
	}
	t.Skipf("no python3 that imports igraph and leidenalg (tried %s): apt-get install python3-igraph python3-leidenalg", strings.Join(cands, ", "))
	return ""
}

func readEdges(t *testing.T, name string) (int, []tracker.Edge) {
	t.Helper()
	f, err := os.Open(filepath.Join("..", "..", "testdata", name))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	n := 0
	var edges []tracker.Edge
	sc := bufio.NewScanner(f)
	for sc.Scan() {
		fs := strings.Fields(sc.Text())
		if len(fs) == 0 || strings.HasPrefix(fs[0], "#") {
			continue
		}
		u, err1 := strconv.Atoi(fs[0])
		v, err2 := strconv.Atoi(fs[1])
		if err1 != nil || err2 != nil {
			t.Fatalf("%s: bad line %q", name, sc.Text())
		}
		n = max(n, u+1, v+1)
		edges = append(edges, tracker.Edge{U: uint32(u), V: uint32(v), W: 1}) // unweighted: the weight column is ignored
	}
	if err := sc.Err(); err != nil {
		t.Fatal(err)
	}
	return n, edges
}

// TestRecalledOptima cross-checks the modularity optima that
// testdata/SOURCES.md (section 1) gives from memory for Les Miserables
// (unweighted) and the football graph, against leidenalg, and shoal
// against leidenalg:
//
//   - leidenalg's best of 200 seeds agrees with the recalled optimum
//     (Brandes et al. 2008 / Aloise et al. 2010: lesmis 0.5600 with 6
//     communities; Xu et al. 2007 / Aloise et al. 2010: football 0.6046
//     with 10) within 0.0005, the rounding of the recalled figures, with
//     that number of communities. Measured with leidenalg 0.9.1 and igraph
//     0.10.2 (Debian 12): 0.56001 (all 200 seeds) and 0.60457 (185 of 200);
//   - tracker.Modularity of leidenalg's best membership equals igraph's
//     Graph.modularity of it within 1e-9 (one scoring, two libraries);
//   - shoal's best over seeds 0..9 (tracker.Detect) comes within 0.002 of
//     leidenalg's best and does not exceed it by more than 1e-9. Measured:
//     equal to 1e-7 on both graphs (lesmis reaches it at seed 6 only, the
//     next best seed is 0.0009 below; football at seeds 0, 2, 5, 8); 0.002
//     is tighter than the common-practice 0.005 and leaves room for a
//     change of node order.
func TestRecalledOptima(t *testing.T) {
	py := refPython(t)
	const seeds = 200
	for _, c := range []struct {
		file     string
		recalled float64
		comms    int
	}{
		{"lesmis.tsv", 0.5600, 6},    // recalled, Brandes et al. 2008 / Aloise et al. 2010
		{"football.tsv", 0.6046, 10}, // recalled, Xu et al. 2007 / Aloise et al. 2010
	} {
		out, err := exec.Command(py, "-c", bestModularity, filepath.Join("..", "..", "testdata", c.file), strconv.Itoa(seeds)).Output()
		if err != nil {
			if ee, ok := err.(*exec.ExitError); ok {
				t.Fatalf("%s: leidenalg: %v\n%s", c.file, err, ee.Stderr)
			}
			t.Fatalf("%s: leidenalg: %v", c.file, err)
		}
		var ref struct {
			Q          float64  `json:"q"`
			AtBest     int      `json:"at_best"`
			Membership []uint32 `json:"membership"`
			IgraphQ    float64  `json:"igraph_q"`
			Nodes      int      `json:"nodes"`
			Edges      int      `json:"edges"`
			Versions   []string `json:"versions"`
		}
		if err := json.Unmarshal(out, &ref); err != nil {
			t.Fatalf("%s: %q: %v", c.file, out, err)
		}
		n, edges := readEdges(t, c.file)
		if ref.Nodes != n || ref.Edges != len(edges) || len(ref.Membership) != n {
			t.Fatalf("%s: python read %d nodes and %d edges (%d labels), Go %d and %d", c.file, ref.Nodes, ref.Edges, len(ref.Membership), n, len(edges))
		}
		g := tracker.NewGraph(n, edges)
		t.Logf("%s: igraph %s, leidenalg %s: best of %d seeds Q = %.6f (%d seeds at it)", c.file, ref.Versions[0], ref.Versions[1], seeds, ref.Q, ref.AtBest)

		if math.Abs(ref.Q-c.recalled) > 0.0005 {
			t.Errorf("%s: leidenalg's best of %d seeds Q = %.6f, recalled optimum %.4f: more than 0.0005 apart", c.file, seeds, ref.Q, c.recalled)
		}
		k := map[uint32]bool{}
		for _, l := range ref.Membership {
			k[l] = true
		}
		if len(k) != c.comms {
			t.Errorf("%s: leidenalg's best has %d communities, the recalled optimum %d", c.file, len(k), c.comms)
		}
		if q := tracker.Modularity(g, ref.Membership, 1); math.Abs(q-ref.IgraphQ) > 1e-9 {
			t.Errorf("%s: tracker.Modularity of leidenalg's best %.12f, igraph's modularity %.12f", c.file, q, ref.IgraphQ)
		}

		best := math.Inf(-1)
		for s := uint64(0); s < 10; s++ {
			best = max(best, tracker.Detect(g, &tracker.Options{Seed: s}).Modularity)
		}
		t.Logf("%s: shoal best of seeds 0..9 Q = %.6f (leidenalg - shoal = %.2g)", c.file, best, ref.Q-best)
		if best < ref.Q-0.002 || best > ref.Q+1e-9 {
			t.Errorf("%s: shoal's best of 10 seeds Q = %.6f, leidenalg's best of %d %.6f: want within [-0.002, +1e-9]", c.file, best, seeds, ref.Q)
		}
	}
}
