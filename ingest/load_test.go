package ingest

import (
	"bufio"
	"bytes"
	"errors"
	"fmt"
	"io"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"shoal/tracker"
)

// TestLoadDatasets checks node and edge counts against the published
// figures quoted in testdata/SOURCES.md (sections 1, 3 and 6).
func TestLoadDatasets(t *testing.T) {
	cases := []struct {
		file      string
		opts      LoadOptions
		nodes     int
		edges     int
		selfLoops int
		events    int
		source    string
	}{
		{"karate.tsv", LoadOptions{}, 34, 78, 0, 78, "Zachary 1977 via Newman's netdata; SOURCES.md section 1"},
		{"football.tsv", LoadOptions{}, 115, 613, 0, 613, "Girvan & Newman 2002, 613 unique edges; SOURCES.md sections 1, 6"},
		{"lesmis.tsv", LoadOptions{}, 77, 254, 0, 254, "Knuth 1993 via Newman's netdata; SOURCES.md section 1"},
		{"celegans_metabolic.tsv", LoadOptions{}, 453, 2040, 15, 2040, "Duch & Arenas 2005: 2025 edges + 15 self-loops; SOURCES.md section 6"},
		// u v time (Unix seconds): no weight column.
		{"collegemsg.tsv", LoadOptions{ReaderOptions: ReaderOptions{Columns: ColumnsTime, TimeUnit: Seconds}}, 1899, -1, 0, 59835, "SNAP CollegeMsg, 1899 nodes, 59835 temporal edges; SOURCES.md section 3"},
	}
	for _, c := range cases {
		t.Run(c.file, func(t *testing.T) {
			ld, err := LoadFile(filepath.Join("..", "testdata", c.file), c.opts)
			if err != nil {
				t.Fatal(err)
			}
			loops := 0
			for _, e := range ld.Edges {
				if e.U > e.V || !(e.W > 0) {
					t.Fatalf("edge %+v", e)
				}
				if e.U == e.V {
					loops++
				}
			}
			if ld.Dict.Len() != c.nodes || (c.edges >= 0 && len(ld.Edges) != c.edges) ||
				loops != c.selfLoops || ld.Events != c.events {
				t.Errorf("nodes %d edges %d self-loops %d events %d; want %d %d %d %d (%s)",
					ld.Dict.Len(), len(ld.Edges), loops, ld.Events, c.nodes, c.edges, c.selfLoops, c.events, c.source)
			}
			if ld.Lines != ld.Events+1 { // one header comment line each
				t.Errorf("lines %d", ld.Lines)
			}
		})
	}
}

func TestCollegeMsgTimes(t *testing.T) {
	// SOURCES.md section 3: sorted by time, unix 1082040961 ... 1098777142.
	f, err := os.Open("../testdata/collegemsg.tsv")
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	rd, err := NewReader(f, ReaderOptions{Name: "collegemsg.tsv", Columns: ColumnsTime, TimeUnit: Seconds})
	if err != nil {
		t.Fatal(err)
	}
	var ev Event
	var first, last, n int64
	prev := int64(-1 << 63)
	for {
		err := rd.Next(&ev)
		if err == io.EOF {
			break
		}
		if err != nil {
			t.Fatal(err)
		}
		if !ev.HasTS || ev.HasW || ev.TS < prev {
			t.Fatalf("line %d: %+v", rd.Line(), ev)
		}
		if n == 0 {
			first = ev.TS
		}
		last, prev = ev.TS, ev.TS
		n++
	}
	if n != 59835 || first != 1082040961000 || last != 1098777142000 {
		t.Errorf("%d records, %d .. %d ms", n, first, last)
	}
}

func TestBitcoinOTCNegativeRatings(t *testing.T) {
	// SOURCES.md section 3: 35592 ratings over 5881 nodes, 3563 of them
	// negative. A negative rating is not a valid weight: the Reader must
	// report exactly those lines and go on; Load must stop at the first.
	const path = "../testdata/bitcoin_otc.tsv"
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	rd, _ := NewReader(f, ReaderOptions{Name: "bitcoin_otc.tsv", TimeUnit: Seconds})
	var ev Event
	good, bad, firstBad := 0, 0, 0
	nodes := map[string]bool{}
	for {
		err := rd.Next(&ev)
		if err == io.EOF {
			break
		}
		var de *DecodeError
		if errors.As(err, &de) {
			if !errors.Is(err, ErrBadWeight) || de.Field != "weight" || !strings.Contains(de.Reason, "must be > 0, got -") {
				t.Fatalf("%v", err)
			}
			if bad == 0 {
				firstBad = de.Line
			}
			bad++
			f := strings.Fields(string(de.Raw))
			nodes[f[0]], nodes[f[1]] = true, true
			continue
		}
		if err != nil {
			t.Fatal(err)
		}
		nodes[ev.Src], nodes[ev.Dst] = true, true
		good++
	}
	if good+bad != 35592 || bad != 3563 || len(nodes) != 5881 {
		t.Errorf("%d good, %d bad, %d nodes", good, bad, len(nodes))
	}
	ld, err := LoadFile(path, LoadOptions{ReaderOptions: ReaderOptions{TimeUnit: Seconds}})
	var de *DecodeError
	if ld != nil || !errors.As(err, &de) || de.Line != firstBad || de.File != path {
		t.Errorf("Load: %v, %v (first bad line %d)", ld, err, firstBad)
	}
}

// bruteFold is the reference fold: a map from the unordered name pair to
// its weight, with node-remove scanning the whole map. It applies the rules
// of Load's doc comment in the most direct way.
type bruteFold struct {
	w         map[[2]string]float64
	order     [][2]string // pairs in order of first creation
	seen      map[[2]string]bool
	nodes     []string
	nodeIndex map[string]bool
}

func newBruteFold() *bruteFold {
	return &bruteFold{w: map[[2]string]float64{}, seen: map[[2]string]bool{}, nodeIndex: map[string]bool{}}
}

func (b *bruteFold) addNode(n string) {
	if !b.nodeIndex[n] {
		b.nodeIndex[n] = true
		b.nodes = append(b.nodes, n)
	}
}

func (b *bruteFold) apply(ev Event) {
	if ev.Op == OpNodeRemove {
		for p := range b.w {
			if p[0] == ev.Src || p[1] == ev.Src {
				delete(b.w, p)
			}
		}
		return
	}
	if ev.Op == OpAdd || (ev.Op == OpSet && ev.W > 0) {
		b.addNode(ev.Src)
		b.addNode(ev.Dst)
	}
	p := [2]string{ev.Src, ev.Dst}
	if p[0] > p[1] {
		p[0], p[1] = p[1], p[0]
	}
	if !b.nodeIndex[p[0]] || !b.nodeIndex[p[1]] {
		return
	}
	creates := ev.Op == OpAdd || (ev.Op == OpSet && ev.W > 0)
	if creates && !b.seen[p] {
		b.seen[p] = true
		b.order = append(b.order, p)
	}
	switch ev.Op {
	case OpAdd:
		w := 1.0
		if ev.HasW {
			w = ev.W
		}
		b.w[p] += w
	case OpRemove:
		if !ev.HasW {
			delete(b.w, p)
		} else if before, ok := b.w[p]; ok {
			after := before - ev.W
			if after <= before*1e-12 {
				delete(b.w, p)
			} else {
				b.w[p] = after
			}
		}
	case OpSet:
		if ev.W > 0 {
			b.w[p] = ev.W
		} else {
			delete(b.w, p)
		}
	}
}

// randomEvents draws a sequence of valid events over a few nodes, so that
// pairs are hit again and again by every op.
func randomEvents(rng *rand.Rand, n, nodes int) []Event {
	weights := []float64{0.1, 0.2, 0.3, 0.5, 1, 2, 3, 7.25}
	// Plain numbers take the loader's small-number path; "n7" and "07"
	// must stay apart from "7".
	forms := []string{"%d", "n%d", "0%d"}
	name := func() string { return fmt.Sprintf(forms[rng.IntN(len(forms))], rng.IntN(nodes)) }
	evs := make([]Event, n)
	for i := range evs {
		ev := Event{Src: name(), Dst: name()}
		switch r := rng.IntN(20); {
		case r < 10:
			ev.Op = OpAdd
			if rng.IntN(2) == 0 {
				ev.W, ev.HasW = weights[rng.IntN(len(weights))], true
			}
		case r < 14:
			ev.Op = OpRemove
			if rng.IntN(2) == 0 {
				ev.W, ev.HasW = weights[rng.IntN(len(weights))], true
			}
		case r < 18:
			ev.Op = OpSet
			ev.HasW = true
			if rng.IntN(4) > 0 {
				ev.W = weights[rng.IntN(len(weights))]
			}
		default:
			ev.Op = OpNodeRemove
			ev.Dst = ""
		}
		evs[i] = ev
	}
	return evs
}

// encodeJSONLines writes events in the JSON-lines format, the way a
// producer would (strconv 'g' formatting round-trips a float64 exactly).
func encodeJSONLines(evs []Event) []byte {
	var b bytes.Buffer
	for _, ev := range evs {
		fmt.Fprintf(&b, `{"op":%q,"src":%q`, ev.Op.String(), ev.Src)
		if ev.Op != OpNodeRemove {
			fmt.Fprintf(&b, `,"dst":%q`, ev.Dst)
		}
		if ev.HasW {
			fmt.Fprintf(&b, `,"w":%v`, ev.W)
		}
		b.WriteString("}\n")
	}
	return b.Bytes()
}

func TestLoadFoldMatchesBruteForce(t *testing.T) {
	for seed := range uint64(200) {
		rng := rand.New(rand.NewPCG(seed, 99))
		evs := randomEvents(rng, 1+rng.IntN(300), 2+rng.IntN(10))
		ld, err := Load(bytes.NewReader(encodeJSONLines(evs)), LoadOptions{})
		if err != nil {
			t.Fatalf("seed %d: %v", seed, err)
		}
		ref := newBruteFold()
		for _, ev := range evs {
			ref.apply(ev)
		}
		if ld.Events != len(evs) {
			t.Fatalf("seed %d: %d events", seed, ld.Events)
		}
		// Same nodes in the same order.
		if ld.Dict.Len() != len(ref.nodes) {
			t.Fatalf("seed %d: %d nodes, want %d", seed, ld.Dict.Len(), len(ref.nodes))
		}
		for i, n := range ref.nodes {
			if ld.Dict.Name(uint32(i)) != n {
				t.Fatalf("seed %d: node %d is %q, want %q", seed, i, ld.Dict.Name(uint32(i)), n)
			}
		}
		// Same edges with exactly the same weights (same operations in
		// the same order), in order of first creation.
		var want []tracker.Edge
		for _, p := range ref.order {
			if w, ok := ref.w[p]; ok {
				u, _ := ld.Dict.Lookup(p[0])
				v, _ := ld.Dict.Lookup(p[1])
				if u > v {
					u, v = v, u
				}
				want = append(want, tracker.Edge{U: u, V: v, W: w})
			}
		}
		if fmt.Sprint(ld.Edges) != fmt.Sprint(want) {
			t.Fatalf("seed %d:\n got %v\nwant %v", seed, ld.Edges, want)
		}
	}
}

func TestLoadFoldRules(t *testing.T) {
	load := func(in string) *Loaded {
		t.Helper()
		ld, err := Load(strings.NewReader(in), LoadOptions{})
		if err != nil {
			t.Fatal(err)
		}
		return ld
	}
	edges := func(ld *Loaded) string {
		var s []string
		for _, e := range ld.Edges {
			s = append(s, fmt.Sprintf("%s-%s:%g", ld.Dict.Name(e.U), ld.Dict.Name(e.V), e.W))
		}
		return strings.Join(s, " ")
	}
	cases := []struct{ name, in, want string }{
		{"parallel adds sum, both directions", "a b\nb a 2\na b 0.5\n", "a-b:3.5"},
		{"self-loops kept", "a a 2\na a\n", "a-a:3"},
		{"rounding residue deletes", `{"src":"a","dst":"b","w":0.1}` + "\n" + `{"src":"a","dst":"b","w":0.2}` + "\n" + `{"op":"remove","src":"a","dst":"b","w":0.3}`, ""},
		{"subtract below zero deletes, re-add starts fresh", "{\"src\":\"a\",\"dst\":\"b\",\"w\":2}\n{\"op\":\"remove\",\"src\":\"b\",\"dst\":\"a\",\"w\":5}\n{\"src\":\"a\",\"dst\":\"b\"}\n", "a-b:1"},
		{"partial subtract", "{\"src\":\"a\",\"dst\":\"b\",\"w\":5}\n{\"op\":\"remove\",\"src\":\"a\",\"dst\":\"b\",\"w\":2}\n", "a-b:3"},
		{"set overrides, set 0 deletes", "{\"src\":\"a\",\"dst\":\"b\",\"w\":5}\n{\"op\":\"set\",\"src\":\"a\",\"dst\":\"b\",\"w\":2}\n{\"op\":\"set\",\"src\":\"a\",\"dst\":\"c\",\"w\":4}\n{\"op\":\"set\",\"src\":\"c\",\"dst\":\"a\",\"w\":0}\n", "a-b:2"},
		{"node-remove drops the node's edges, later adds attach it again",
			"{\"src\":\"a\",\"dst\":\"b\"}\n{\"src\":\"a\",\"dst\":\"c\"}\n{\"src\":\"b\",\"dst\":\"c\"}\n{\"op\":\"node-remove\",\"src\":\"a\"}\n{\"src\":\"c\",\"dst\":\"a\",\"w\":4}\n", "a-c:4 b-c:1"},
		{"remove of absent things does nothing", "{\"op\":\"remove\",\"src\":\"x\",\"dst\":\"y\"}\n{\"op\":\"node-remove\",\"src\":\"z\"}\n{\"src\":\"a\",\"dst\":\"b\"}\n{\"op\":\"remove\",\"src\":\"a\",\"dst\":\"c\",\"w\":1}\n", "a-b:1"},
	}
	for _, c := range cases {
		if got := edges(load(c.in)); got != c.want {
			t.Errorf("%s: got %q, want %q", c.name, got, c.want)
		}
	}
	// The removed node stays in the Dict; ids named only by remove or
	// node-remove are not added.
	ld := load("{\"src\":\"a\",\"dst\":\"b\"}\n{\"op\":\"node-remove\",\"src\":\"a\"}\n{\"op\":\"remove\",\"src\":\"x\",\"dst\":\"y\"}\n{\"op\":\"node-remove\",\"src\":\"q\"}\n")
	if ld.Dict.Len() != 2 || len(ld.Edges) != 0 {
		t.Errorf("dict %d, edges %v", ld.Dict.Len(), ld.Edges)
	}
}

func TestLoadStopsAtFirstBadLine(t *testing.T) {
	ld, err := Load(strings.NewReader("a b\nc d\nc d 0\ne f -1\n"), LoadOptions{ReaderOptions: ReaderOptions{Name: "g.tsv"}})
	if ld != nil || err == nil || err.Error() != "g.tsv:3: weight: must be > 0, got 0" || !errors.Is(err, ErrBadWeight) {
		t.Fatalf("%v %v", ld, err)
	}
}

func TestLoadFile(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "g.tsv")
	data := []byte("# g\na b\nb c 2\n")
	if err := os.WriteFile(path, data, 0o600); err != nil {
		t.Fatal(err)
	}
	var progress []int64
	ld, err := LoadFile(path, LoadOptions{Progress: func(n int64) { progress = append(progress, n) }})
	if err != nil || len(ld.Edges) != 2 || ld.Lines != 3 {
		t.Fatalf("%v %+v", err, ld)
	}
	if len(progress) == 0 || progress[len(progress)-1] != int64(len(data)) {
		t.Errorf("progress %v", progress)
	}
	for i := 1; i < len(progress); i++ {
		if progress[i] < progress[i-1] {
			t.Errorf("progress goes back: %v", progress)
		}
	}
	if _, err := LoadFile(filepath.Join(dir, "missing.tsv"), LoadOptions{}); !errors.Is(err, os.ErrNotExist) ||
		!strings.HasPrefix(err.Error(), "ingest: open ") {
		t.Errorf("missing file: %v", err)
	}

	// "-" reads standard input and names it "stdin" in errors.
	if err := os.WriteFile(path, []byte("a b\nbad\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	in, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer in.Close()
	saved := os.Stdin
	os.Stdin = in
	defer func() { os.Stdin = saved }()
	if _, err := LoadFile("-", LoadOptions{}); err == nil || err.Error() != "stdin:2: dst: missing" {
		t.Errorf("stdin: %v", err)
	}
}

// writeEdgeFile writes an edge list of m random edges over n nodes, with
// weights, in the layout of the testdata files (invented data).
func writeEdgeFile(tb testing.TB, path, idFormat string, n, m int) int64 {
	f, err := os.Create(path)
	if err != nil {
		tb.Fatal(err)
	}
	w := bufio.NewWriter(f)
	rng := rand.New(rand.NewPCG(7, 7))
	fmt.Fprintln(w, "# u\tv\tw (generated)")
	for range m {
		fmt.Fprintf(w, idFormat+"\t"+idFormat+"\t%d\n", rng.IntN(n), rng.IntN(n), 1+rng.IntN(9))
	}
	if err := w.Flush(); err != nil {
		tb.Fatal(err)
	}
	st, _ := f.Stat()
	f.Close()
	return st.Size()
}

// BenchmarkLoad loads a generated file of 10^6 weighted edge lines over
// 10^5 nodes, with numeric ids (as in the testdata files) and with
// string ids ("acct-0012345").
func BenchmarkLoad(b *testing.B) {
	for _, format := range []string{"%d", "acct-%07d"} {
		b.Run("ids="+map[string]string{"%d": "numeric", "acct-%07d": "string"}[format], func(b *testing.B) {
			path := filepath.Join(b.TempDir(), "g.tsv")
			size := writeEdgeFile(b, path, format, 100000, 1000000)
			b.SetBytes(size)
			b.ReportAllocs()
			for b.Loop() {
				ld, err := LoadFile(path, LoadOptions{})
				if err != nil || ld.Events != 1000000 {
					b.Fatal(err)
				}
			}
			b.ReportMetric(float64(b.N)*1e6/b.Elapsed().Seconds(), "events/s")
		})
	}
}
