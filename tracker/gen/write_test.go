package gen

import (
	"bufio"
	"bytes"
	"errors"
	"fmt"
	"strings"
	"testing"

	"shoal/tracker"
)

// Round trip: parse the written lines back with fmt.Sscanf (an independent
// reader) and compare with the graph.
func TestWriteRoundTrip(t *testing.T) {
	g, err := LFR(LFROptions{N: 500, AvgDegree: 8, MaxDegree: 30, MinCommunity: 10, MaxCommunity: 40, Mu: 0.3, Seed: 2})
	if err != nil {
		t.Fatal(err)
	}
	var eb, mb bytes.Buffer
	if err := WriteEdgeList(&eb, g); err != nil {
		t.Fatal(err)
	}
	if err := WriteMembership(&mb, g); err != nil {
		t.Fatal(err)
	}
	var edges []tracker.Edge
	sc := bufio.NewScanner(&eb)
	for sc.Scan() {
		var e tracker.Edge
		if n, err := fmt.Sscanf(sc.Text(), "%d\t%d", &e.U, &e.V); n != 2 || err != nil || strings.Count(sc.Text(), "\t") != 1 {
			t.Fatalf("bad edge line %q", sc.Text())
		}
		e.W = 1
		edges = append(edges, e)
	}
	if len(edges) != len(g.Edges) {
		t.Fatalf("read %d edges, wrote %d", len(edges), len(g.Edges))
	}
	for i := range edges {
		if edges[i] != g.Edges[i] {
			t.Fatalf("edge %d: read %+v, graph has %+v", i, edges[i], g.Edges[i])
		}
	}
	lines := strings.Split(strings.TrimSuffix(mb.String(), "\n"), "\n")
	if len(lines) != g.N {
		t.Fatalf("membership has %d lines, want %d", len(lines), g.N)
	}
	for v, l := range lines {
		var node, c uint32
		if n, err := fmt.Sscanf(l, "%d\t%d", &node, &c); n != 2 || err != nil || node != uint32(v) || c != g.Membership[v] {
			t.Fatalf("membership line %d = %q, want %d\\t%d", v, l, v, g.Membership[v])
		}
	}
}

type failWriter struct{ after int }

var errDisk = errors.New("disk full")

func (w *failWriter) Write(p []byte) (int, error) {
	if w.after < len(p) {
		return 0, errDisk
	}
	w.after -= len(p)
	return len(p), nil
}

// A failing writer's error comes back wrapped, with the package prefix.
func TestWriteErrors(t *testing.T) {
	g, err := Planted(PlantedOptions{N: 20000, Groups: 10, AvgDegree: 10, Mu: 0.2, Seed: 1})
	if err != nil {
		t.Fatal(err)
	}
	for name, write := range map[string]func(*Graph) error{
		"edges":      func(g *Graph) error { return WriteEdgeList(&failWriter{after: 100}, g) },
		"membership": func(g *Graph) error { return WriteMembership(&failWriter{after: 100}, g) },
	} {
		err := write(g)
		if !errors.Is(err, errDisk) || !strings.HasPrefix(err.Error(), "gen: ") {
			t.Errorf("%s: error %v, want a wrapped %v with prefix gen:", name, err, errDisk)
		}
	}
}
