package tracker

import (
	"bufio"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
)

// readTSV reads a testdata edge list "u v [w ...]" with integer ids (the
// files of testdata/, see testdata/SOURCES.md). It returns the edges with
// ids compacted to 0..n-1 in order of first appearance unless raw is set,
// in which case ids are used as given (n = max id + 1).
func readTSV(t testing.TB, name string, weighted bool) (n int, edges []Edge) {
	t.Helper()
	f, err := os.Open(filepath.Join("..", "testdata", name))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	sc := bufio.NewScanner(f)
	for sc.Scan() {
		line := strings.TrimSpace(sc.Text())
		if line == "" || line[0] == '#' {
			continue
		}
		fs := strings.Fields(line)
		u, err1 := strconv.Atoi(fs[0])
		v, err2 := strconv.Atoi(fs[1])
		if err1 != nil || err2 != nil {
			t.Fatalf("%s: bad line %q", name, line)
		}
		w := 1.0
		if weighted && len(fs) > 2 {
			w, err = strconv.ParseFloat(fs[2], 64)
			if err != nil {
				t.Fatal(err)
			}
		}
		if u+1 > n {
			n = u + 1
		}
		if v+1 > n {
			n = v + 1
		}
		edges = append(edges, Edge{U: uint32(u), V: uint32(v), W: w})
	}
	if err := sc.Err(); err != nil {
		t.Fatal(err)
	}
	return n, edges
}

// readLabels reads "node label" lines into a slice indexed by node.
func readLabels(t testing.TB, name string, n int) []uint64 {
	t.Helper()
	f, err := os.Open(filepath.Join("..", "testdata", name))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	out := make([]uint64, n)
	for i := range out {
		out[i] = NoCommunity
	}
	sc := bufio.NewScanner(f)
	for sc.Scan() {
		line := strings.TrimSpace(sc.Text())
		if line == "" || line[0] == '#' {
			continue
		}
		fs := strings.Fields(line)
		u, _ := strconv.Atoi(fs[0])
		l, err := strconv.Atoi(fs[1])
		if err != nil {
			t.Fatalf("%s: bad line %q", name, line)
		}
		out[u] = uint64(l)
	}
	return out
}
