package ingest

import (
	"bytes"
	"fmt"
	"strconv"
	"strings"
	"testing"
)

func TestDecodeEdgeListAccepts(t *testing.T) {
	cases := []struct {
		line string
		o    EdgeListOptions
		want Event
	}{
		{"a b", elo{}, Event{Src: "a", Dst: "b"}},
		{"0\t1", elo{}, Event{Src: "0", Dst: "1"}},
		{"a\tb\t2.5", elo{}, Event{Src: "a", Dst: "b", W: 2.5, HasW: true}},
		{"a,b,2.5,1700000000000", elo{}, Event{Src: "a", Dst: "b", W: 2.5, HasW: true, TS: 1700000000000, HasTS: true}},
		{"a , b ,\t3", elo{}, Event{Src: "a", Dst: "b", W: 3, HasW: true}},
		{"  a   b  ", elo{}, Event{Src: "a", Dst: "b"}},
		{"a b 1e3", elo{}, Event{Src: "a", Dst: "b", W: 1000, HasW: true}},
		{"a b .5", elo{}, Event{Src: "a", Dst: "b", W: 0.5, HasW: true}},
		{"a b +7.", elo{}, Event{Src: "a", Dst: "b", W: 7, HasW: true}},
		{"a b 1 2026-11-30T08:15:02Z", elo{}, Event{Src: "a", Dst: "b", W: 1, HasW: true, TS: ms(t, "2026-11-30T08:15:02Z"), HasTS: true}},
		// RFC 3339 is not scaled by the unit; numbers are.
		{"a b 1 2026-11-30T08:15:02Z", elo{TimeUnit: Seconds}, Event{Src: "a", Dst: "b", W: 1, HasW: true, TS: ms(t, "2026-11-30T08:15:02Z"), HasTS: true}},
		// The first CollegeMsg record (testdata/collegemsg.tsv: u v time in
		// Unix seconds). Read with the default layout its time becomes a
		// weight, which is why ColumnsTime exists.
		{"1\t2\t1082040961", elo{TimeUnit: Seconds}, Event{Src: "1", Dst: "2", W: 1082040961, HasW: true}},
		{"1 2 1 1082040961", elo{TimeUnit: Seconds}, Event{Src: "1", Dst: "2", W: 1, HasW: true, TS: 1082040961000, HasTS: true}},
		// Without a weight column the third field is the time.
		{"1\t2\t1082040961", elo{TimeUnit: Seconds, Columns: ColumnsTime}, Event{Src: "1", Dst: "2", TS: 1082040961000, HasTS: true}},
		{"1 2", elo{Columns: ColumnsTime}, Event{Src: "1", Dst: "2"}},
		{"1 2 1 -5", elo{TimeUnit: Seconds}, Event{Src: "1", Dst: "2", W: 1, HasW: true, TS: -5000, HasTS: true}},
		// Self-loop; non-ASCII ids; '#' inside an id is not a comment.
		{"a a", elo{}, Event{Src: "a", Dst: "a"}},
		{"Zürich São-Paulo", elo{}, Event{Src: "Zürich", Dst: "São-Paulo"}},
		{"a #b", elo{}, Event{Src: "a", Dst: "#b"}},
		{strings.Repeat("é", 128) + " b", elo{}, Event{Src: strings.Repeat("é", 128), Dst: "b"}},
	}
	for _, c := range cases {
		var ev Event
		if err := DecodeEdgeList([]byte(c.line), c.o, &ev); err != nil {
			t.Errorf("%q: %v", c.line, err)
			continue
		}
		if ev != c.want {
			t.Errorf("%q:\n got %+v\nwant %+v", c.line, ev, c.want)
		}
		checkValid(t, c.line, &ev)
	}
	// Blank and comment lines are not events on their own.
	for _, line := range []string{"", "  \t", "# u v", "  # x"} {
		var ev Event
		if err := DecodeEdgeList([]byte(line), elo{}, &ev); err == nil {
			t.Errorf("%q accepted", line)
		}
	}
}

func FuzzDecodeEdgeList(f *testing.F) {
	for _, c := range badLines {
		if c.format == EdgeList {
			f.Add([]byte(c.line), uint8(c.el.TimeUnit), c.el.Columns == ColumnsTime)
		}
	}
	for _, s := range []string{"a b", "a,b,2.5,1700000000000", "a , b ,\t3", "1 2 1 2026-11-30T08:15:02.5+01:00", "x y 1e-400"} {
		f.Add([]byte(s), uint8(0), false)
		f.Add([]byte(s), uint8(1), true)
	}
	f.Fuzz(func(t *testing.T, line []byte, unit uint8, noWeight bool) {
		u := TimeUnit(unit % 2)
		o := EdgeListOptions{TimeUnit: u}
		if noWeight {
			o.Columns = ColumnsTime
		}
		var ev Event
		err := DecodeEdgeList(line, o, &ev)
		if err != nil {
			de, ok := err.(*DecodeError)
			if !ok || de.Err == nil || de.Reason == "" || !bytes.Equal(de.Raw, line) {
				t.Fatalf("bad error %#v", err)
			}
			return
		}
		checkValid(t, string(line), &ev)
		if ev.Op != OpAdd || strings.ContainsRune(ev.Src+ev.Dst, '"') {
			t.Fatalf("%q: op %v", line, ev.Op)
		}
		// Reference split: the standard library's FieldsFunc on the three
		// separators (it merges runs, which agrees because empty fields
		// are rejected).
		fields := strings.FieldsFunc(string(line), func(r rune) bool { return r == ' ' || r == '\t' || r == ',' })
		if noWeight {
			// Put a stand-in weight column in, to check as the default layout.
			if len(fields) == 3 {
				fields = []string{fields[0], fields[1], "", fields[2]}
			}
			if ev.HasW || len(fields) > 4 {
				t.Fatalf("%q: weight without a weight column: %+v", line, ev)
			}
		} else if ev.HasW != (len(fields) >= 3) {
			t.Fatalf("%q: weight presence %+v", line, ev)
		}
		if len(fields) < 2 || len(fields) > 4 || fields[0] != ev.Src || fields[1] != ev.Dst {
			t.Fatalf("%q: got %+v, fields %q", line, ev, fields)
		}
		if ev.HasTS != (len(fields) == 4) {
			t.Fatalf("%q: time presence %+v", line, ev)
		}
		if ev.HasW {
			w, err := strconv.ParseFloat(fields[2], 64)
			if err != nil || w != ev.W {
				t.Fatalf("%q: weight %v, strconv %v %v", line, ev.W, w, err)
			}
		}
		if ev.HasTS {
			if n, err := strconv.ParseInt(fields[3], 10, 64); err == nil && fields[3][0] != '+' {
				want := n
				if u == Seconds {
					want = n * 1000
				}
				if want != ev.TS {
					t.Fatalf("%q: ts %d, want %d", line, ev.TS, want)
				}
			} else if want := ms(t, fields[3]); want != ev.TS {
				t.Fatalf("%q: ts %d, time.Parse %d", line, ev.TS, want)
			}
		}
	})
}

// benchEdgeList is an edge list of n lines "u v w ts" with integer ids
// (invented data).
func benchEdgeList(n int) []byte {
	var b bytes.Buffer
	b.WriteString("# u v w ts (generated)\n")
	for i := range n {
		fmt.Fprintf(&b, "%d\t%d\t%d\t%d\n", (i*7919)%100000, (i*104729+13)%100000, 1+i%5, 1082040961+int64(i))
	}
	return b.Bytes()
}

// BenchmarkDecodeEdgeList measures the Reader over an edge list, with the
// ids turned into strings (Reader.Next).
func BenchmarkDecodeEdgeList(b *testing.B) {
	data := benchEdgeList(100000)
	var ev Event
	var n int64
	b.ReportAllocs()
	b.SetBytes(int64(len(data)))
	for b.Loop() {
		rd, err := NewReader(bytes.NewReader(data), ReaderOptions{TimeUnit: Seconds})
		if err != nil {
			b.Fatal(err)
		}
		for {
			err := rd.Next(&ev)
			if err != nil {
				break
			}
			n++
		}
	}
	b.ReportMetric(float64(n)/b.Elapsed().Seconds(), "events/s")
}
