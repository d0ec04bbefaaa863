package ingest

import (
	"bytes"
	"errors"
	"io"
	"strings"
	"testing"
	"testing/iotest"
)

type readResult struct {
	ev   Event
	line int
	err  string
}

// readAll drains a Reader, recording every event and every decode error.
func readAll(t *testing.T, r io.Reader, o ReaderOptions) []readResult {
	t.Helper()
	rd, err := NewReader(r, o)
	if err != nil {
		t.Fatal(err)
	}
	if rd.Line() != 0 {
		t.Fatalf("Line before Next = %d", rd.Line())
	}
	var out []readResult
	for {
		var ev Event
		err := rd.Next(&ev)
		if err == io.EOF {
			return out
		}
		var de *DecodeError
		if err != nil && !errors.As(err, &de) {
			t.Fatalf("Next: %v", err)
		}
		res := readResult{ev: ev, line: rd.Line()}
		if err != nil {
			res.ev = Event{}
			res.err = err.Error()
			if de.Line != rd.Line() {
				t.Errorf("DecodeError.Line %d, Reader.Line %d", de.Line, rd.Line())
			}
		}
		out = append(out, res)
	}
}

func TestReaderEdgeListFile(t *testing.T) {
	// A BOM, CRLF endings, comments, blank lines, and the three separators.
	in := "\xef\xbb\xbf# u v w ts\r\n" +
		"a\tb\r\n" +
		"\r\n" +
		"  # indented comment\n" +
		"a,c,2.5\r\n" +
		"b c 3 1700000000000\n" +
		"   \t \n" +
		"c , d , 1 , 2026-11-30T08:15:02Z" // no final newline
	got := readAll(t, strings.NewReader(in), ReaderOptions{Name: "g.csv"})
	want := []readResult{
		{ev: Event{Src: "a", Dst: "b"}, line: 2},
		{ev: Event{Src: "a", Dst: "c", W: 2.5, HasW: true}, line: 5},
		{ev: Event{Src: "b", Dst: "c", W: 3, HasW: true, TS: 1700000000000, HasTS: true}, line: 6},
		{ev: Event{Src: "c", Dst: "d", W: 1, HasW: true, TS: ms(t, "2026-11-30T08:15:02Z"), HasTS: true}, line: 8},
	}
	if !equalResults(got, want) {
		t.Errorf("got  %+v\nwant %+v", got, want)
	}
}

func TestReaderDetectsJSON(t *testing.T) {
	in := "# events (invented)\n\n" +
		`{"src":"a","dst":"b","w":2}` + "\r\n" +
		`{"op":"node-remove","src":"a"}` + "\n"
	rd, err := NewReader(strings.NewReader("\xef\xbb\xbf"+in), ReaderOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if rd.Format() != Auto {
		t.Fatalf("Format before reading = %v", rd.Format())
	}
	var ev Event
	if err := rd.Next(&ev); err != nil {
		t.Fatal(err)
	}
	if rd.Format() != JSONLines || ev != (Event{Src: "a", Dst: "b", W: 2, HasW: true}) || rd.Line() != 3 {
		t.Fatalf("format %v, event %+v, line %d", rd.Format(), ev, rd.Line())
	}
	if err := rd.Next(&ev); err != nil || ev != (Event{Op: OpNodeRemove, Src: "a"}) {
		t.Fatalf("%v %+v", err, ev)
	}
	if err := rd.Next(&ev); err != io.EOF {
		t.Fatalf("got %v, want EOF", err)
	}
	if err := rd.Next(&ev); err != io.EOF {
		t.Fatalf("second EOF: %v", err)
	}

	// A first line without '{' means an edge list; a JSON line later is
	// then read as an edge-list line, and fails as one rather than turning
	// into the ids {"src":"a" and "dst":"b"}.
	got := readAll(t, strings.NewReader("a b\n{\"src\":\"a\",\"dst\":\"b\"}\n"), ReaderOptions{Name: "m"})
	if len(got) != 2 || got[1].err != `m:2: src: contains '"' (quoted fields are not supported)` {
		t.Fatalf("%+v", got)
	}
}

func TestReaderGoesOnAfterBadLines(t *testing.T) {
	in := "a b\nx y -1\nc d\n{bad\ne f\n"
	got := readAll(t, strings.NewReader(in), ReaderOptions{Name: "g.tsv"})
	want := []readResult{
		{ev: Event{Src: "a", Dst: "b"}, line: 1},
		{err: `g.tsv:2: weight: must be > 0, got -1`, line: 2},
		{ev: Event{Src: "c", Dst: "d"}, line: 3},
		{err: `g.tsv:4: dst: missing`, line: 4},
		{ev: Event{Src: "e", Dst: "f"}, line: 5},
	}
	if !equalResults(got, want) {
		t.Errorf("got  %+v\nwant %+v", got, want)
	}
}

func TestReaderLongLines(t *testing.T) {
	// MaxLineBytes 16: a 16-byte line (with CRLF) passes, a 17-byte one
	// fails, the next line is read normally.
	line16 := "aaaaaaa bbbbbbbb"
	line40 := "aaaaaaaaaaaaaaaaaaaa bbbbbbbbbbbbbbbbbbb"
	in := line16 + "\r\n" + line16 + "x\n" + line40 + "\nc d\n"
	got := readAll(t, strings.NewReader(in), ReaderOptions{Name: "f.tsv", MaxLineBytes: 16})
	want := []readResult{
		{ev: Event{Src: "aaaaaaa", Dst: "bbbbbbbb"}, line: 1},
		{err: `f.tsv:2: line longer than 16 bytes`, line: 2},
		{err: `f.tsv:3: line longer than 16 bytes`, line: 3},
		{ev: Event{Src: "c", Dst: "d"}, line: 4},
	}
	if !equalResults(got, want) {
		t.Errorf("got  %+v\nwant %+v", got, want)
	}

	// A line far longer than the buffer, with the default limit, in the
	// middle and at the end without a newline; bytes fed one at a time
	// the first time, in big reads the second.
	huge := strings.Repeat("z", 3*DefaultMaxLineBytes+12345)
	in = "a b\n" + huge + "\nc d\n" + huge
	for _, r := range []io.Reader{iotest.OneByteReader(strings.NewReader(in)), strings.NewReader(in)} {
		rd, err := NewReader(r, ReaderOptions{Name: "big"})
		if err != nil {
			t.Fatal(err)
		}
		var ev Event
		steps := []string{"a", "big:2: line longer than 65536 bytes", "c", "big:4: line longer than 65536 bytes"}
		for i, s := range steps {
			err := rd.Next(&ev)
			if i%2 == 0 {
				if err != nil || ev.Src != s {
					t.Fatalf("step %d: %v %+v", i, err, ev)
				}
				continue
			}
			var de *DecodeError
			if !errors.As(err, &de) || err.Error() != s || !errors.Is(err, ErrLineTooLong) {
				t.Fatalf("step %d: %v", i, err)
			}
			if len(de.Raw) != DefaultMaxLineBytes || de.Raw[0] != 'z' {
				t.Fatalf("Raw: %d bytes", len(de.Raw))
			}
		}
		if err := rd.Next(&ev); err != io.EOF {
			t.Fatalf("end: %v", err)
		}
	}
}

func TestReaderChunking(t *testing.T) {
	// The same input read whole, one byte at a time, and with data and EOF
	// together gives the same events (testing/iotest readers).
	var b strings.Builder
	b.WriteString("\xef\xbb\xbf# comment\r\n")
	for i := range 3000 {
		b.WriteString(strings.Repeat("n", i%50+1))
		b.WriteString(",m\t7\r\n")
	}
	in := b.String()
	base := readAll(t, strings.NewReader(in), ReaderOptions{})
	if len(base) != 3000 || base[2999].line != 3001 || base[0].ev.Src != "n" || base[49].ev.Src != strings.Repeat("n", 50) {
		t.Fatalf("base read: %d events", len(base))
	}
	for name, r := range map[string]io.Reader{
		"one byte": iotest.OneByteReader(strings.NewReader(in)),
		"half":     iotest.HalfReader(strings.NewReader(in)),
		"data+EOF": iotest.DataErrReader(strings.NewReader(in)),
	} {
		if got := readAll(t, r, ReaderOptions{}); !equalResults(got, base) {
			t.Errorf("%s: differs", name)
		}
	}
}

func TestReaderReadError(t *testing.T) {
	boom := errors.New("disk on fire")
	r := io.MultiReader(strings.NewReader("a b\nc d\n"), iotest.ErrReader(boom))
	rd, err := NewReader(r, ReaderOptions{Name: "x.tsv"})
	if err != nil {
		t.Fatal(err)
	}
	var ev Event
	for _, want := range []string{"a", "c"} {
		if err := rd.Next(&ev); err != nil || ev.Src != want {
			t.Fatalf("%v %+v", err, ev)
		}
	}
	for range 2 { // sticky
		err := rd.Next(&ev)
		var de *DecodeError
		if !errors.Is(err, boom) || errors.As(err, &de) || err.Error() != "ingest: read x.tsv: disk on fire" {
			t.Fatalf("got %v", err)
		}
	}
}

func TestReaderOptionsValidate(t *testing.T) {
	o := ReaderOptions{Format: 9, TimeUnit: 7, Columns: 5, MaxLineBytes: -1}
	err := o.Validate()
	if err == nil {
		t.Fatal("no error")
	}
	for _, s := range []string{"Format 9", "TimeUnit 7", "Columns 5", "MaxLineBytes -1"} {
		if !strings.Contains(err.Error(), s) {
			t.Errorf("%q does not mention %s", err, s)
		}
	}
	if _, err := NewReader(strings.NewReader(""), o); err == nil {
		t.Error("NewReader accepted invalid options")
	}
	var z ReaderOptions
	z.EnsureDefaults()
	if z.MaxLineBytes != DefaultMaxLineBytes || z.Validate() != nil {
		t.Errorf("defaults %+v", z)
	}
}

func TestReaderAllocs(t *testing.T) {
	// One allocation per event (the string holding both ids), none per line
	// otherwise, once the Reader exists.
	data := bytes.Repeat([]byte(`{"src":"acct-1","dst":"acct-2","w":2,"ts":"2026-11-30T08:15:02.5+01:00"}`+"\n"), 1000)
	rd, _ := NewReader(bytes.NewReader(data), ReaderOptions{})
	var ev Event
	allocs := testing.AllocsPerRun(500, func() {
		if err := rd.Next(&ev); err != nil {
			t.Fatal(err)
		}
	})
	if allocs > 1 {
		t.Errorf("JSON: %v allocations per event, want 1", allocs)
	}
	data = bytes.Repeat([]byte("acct-1\tacct-2\t2.5\t1082040961\r\n"), 1000)
	rd, _ = NewReader(bytes.NewReader(data), ReaderOptions{TimeUnit: Seconds})
	allocs = testing.AllocsPerRun(500, func() {
		if err := rd.Next(&ev); err != nil {
			t.Fatal(err)
		}
	})
	if allocs > 1 {
		t.Errorf("edge list: %v allocations per event, want 1", allocs)
	}
}

func equalResults(a, b []readResult) bool {
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
