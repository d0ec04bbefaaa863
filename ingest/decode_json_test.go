package ingest

import (
	"bytes"
	"encoding/json"
	"fmt"
	"math"
	"strconv"
	"strings"
	"testing"
	"time"
	"unicode/utf8"
)

// ms returns the Unix milliseconds of an RFC 3339 time as the standard
// library reads it (the reference for our own time parser).
func ms(t testing.TB, s string) int64 {
	t.Helper()
	tm, err := time.Parse(time.RFC3339Nano, s)
	if err != nil {
		t.Fatal(err)
	}
	return tm.UnixMilli()
}

func TestDecodeJSONAccepts(t *testing.T) {
	cases := []struct {
		line string
		want Event
	}{
		// The four examples of doc.go (Formats).
		{`{"op":"add","src":"acct-1093","dst":"acct-2210","w":125.0,"ts":"2026-11-30T08:15:02Z"}`,
			Event{Op: OpAdd, Src: "acct-1093", Dst: "acct-2210", W: 125, HasW: true, TS: ms(t, "2026-11-30T08:15:02Z"), HasTS: true}},
		{`{"op":"remove","src":"acct-1093","dst":"acct-2210"}`,
			Event{Op: OpRemove, Src: "acct-1093", Dst: "acct-2210"}},
		{`{"op":"set","src":"svc-cart","dst":"svc-price","w":42}`,
			Event{Op: OpSet, Src: "svc-cart", Dst: "svc-price", W: 42, HasW: true}},
		{`{"op":"node-remove","src":"acct-1093"}`,
			Event{Op: OpNodeRemove, Src: "acct-1093"}},
		// op defaults to add; w and ts optional.
		{`{"src":"a","dst":"b"}`, Event{Src: "a", Dst: "b"}},
		// Fields in any order: the zero weight is checked once op is known.
		{`{"w":0,"dst":"b","op":"set","src":"a"}`, Event{Op: OpSet, Src: "a", Dst: "b", W: 0, HasW: true}},
		{`{"op":"set","src":"a","dst":"b","w":-0}`, Event{Op: OpSet, Src: "a", Dst: "b", W: 0, HasW: true}},
		{`{"op":"remove","src":"a","dst":"b","w":2.5e-1}`, Event{Op: OpRemove, Src: "a", Dst: "b", W: 0.25, HasW: true}},
		// Whitespace anywhere JSON allows it.
		{" \t{ \"src\" : \"a\" ,\t\"dst\" : \"b\" , \"w\" : 3 } \t", Event{Src: "a", Dst: "b", W: 3, HasW: true}},
		// Numeric ts is Unix milliseconds, negative allowed.
		{`{"src":"a","dst":"b","ts":1796026502000}`, Event{Src: "a", Dst: "b", TS: 1796026502000, HasTS: true}},
		{`{"src":"a","dst":"b","ts":-1}`, Event{Src: "a", Dst: "b", TS: -1, HasTS: true}},
		// RFC 3339 with a fraction and an offset.
		{`{"src":"a","dst":"b","ts":"2026-11-30T10:15:02.123456+02:00"}`,
			Event{Src: "a", Dst: "b", TS: ms(t, "2026-11-30T10:15:02.123456+02:00"), HasTS: true}},
		{`{"src":"a","dst":"b","ts":"1969-12-31T23:59:59.9Z"}`, Event{Src: "a", Dst: "b", TS: -100, HasTS: true}},
		{`{"src":"a","dst":"b","ts":"2024-02-29T00:00:00-00:30"}`,
			Event{Src: "a", Dst: "b", TS: ms(t, "2024-02-29T00:00:00-00:30"), HasTS: true}},
		// Escapes: \uXXXX, a surrogate pair, the short escapes, raw UTF-8.
		{`{"src":"caf\u00e9","dst":"\ud83d\ude00 \"q\" \\ \/"}`, Event{Src: "café", Dst: "😀 \"q\" \\ /"}},
		{`{"src":"Zürich-😀","dst":"\u0041\u00DF"}`, Event{Src: "Zürich-😀", Dst: "Aß"}},
		// Escaped keys and op values are unescaped before matching.
		{`{"\u0073rc":"a","dst":"b","op":"\u0073et","w":1}`, Event{Op: OpSet, Src: "a", Dst: "b", W: 1, HasW: true}},
		// Self-loops are events like any other.
		{`{"src":"a","dst":"a"}`, Event{Src: "a", Dst: "a"}},
		// An id of exactly 256 bytes, made of 2-byte runes after unescaping.
		{`{"src":"` + strings.Repeat(`\u00e9`, 128) + `","dst":"b"}`, Event{Src: strings.Repeat("é", 128), Dst: "b"}},
	}
	for _, c := range cases {
		var ev Event
		if err := DecodeJSON([]byte(c.line), &ev); err != nil {
			t.Errorf("%s: %v", c.line, err)
			continue
		}
		if ev != c.want {
			t.Errorf("%s:\n got %+v\nwant %+v", c.line, ev, c.want)
		}
		if math.Signbit(ev.W) {
			t.Errorf("%s: negative zero weight", c.line)
		}
		checkValid(t, c.line, &ev)
	}
}

// checkValid asserts the validity rules of Event (event.go), written out
// again here rather than calling Validate.
func checkValid(t testing.TB, line string, ev *Event) {
	t.Helper()
	id := func(s string) bool {
		if len(s) < 1 || len(s) > 256 || !utf8.ValidString(s) {
			return false
		}
		for _, r := range s {
			if r < 0x20 || r == 0x7f {
				return false
			}
		}
		return true
	}
	bad := func(why string) { t.Fatalf("accepted %q as %+v: %s", line, *ev, why) }
	if ev.Op > OpNodeRemove {
		bad("op")
	}
	if !id(ev.Src) {
		bad("src")
	}
	if ev.Op == OpNodeRemove {
		if ev.Dst != "" || ev.HasW {
			bad("node-remove with dst or w")
		}
	} else if !id(ev.Dst) {
		bad("dst")
	}
	if ev.Op == OpSet && !ev.HasW {
		bad("set without w")
	}
	if ev.HasW {
		if math.IsNaN(ev.W) || math.IsInf(ev.W, 0) || ev.W < 0 || (ev.W == 0 && ev.Op != OpSet) {
			bad("weight")
		}
	} else if ev.W != 0 {
		bad("W set without HasW")
	}
	if !ev.HasTS && ev.TS != 0 {
		bad("TS set without HasTS")
	}
	if err := ev.Validate(); err != nil {
		bad("Validate: " + err.Error())
	}
}

// refEvent is encoding/json's reading of an event line, the reference that
// FuzzDecodeJSON compares our decoder with.
type refEvent struct {
	Op  *string         `json:"op"`
	Src *string         `json:"src"`
	Dst *string         `json:"dst"`
	W   *float64        `json:"w"`
	TS  json.RawMessage `json:"ts"`
}

func FuzzDecodeJSON(f *testing.F) {
	for _, c := range badLines {
		if c.format == JSONLines {
			f.Add([]byte(c.line))
		}
	}
	for _, s := range []string{
		`{"op":"add","src":"acct-1093","dst":"acct-2210","w":125.0,"ts":"2026-11-30T08:15:02Z"}`,
		`{"op":"node-remove","src":"x","ts":5}`,
		`{"src":"caf\u00e9","dst":"\ud83d\ude00 \"q\" \\ \/"}`,
		`{"w":0,"dst":"b","op":"set","src":"a","ts":"2026-11-30T10:15:02.123456+02:00"}`,
		`{"src":"a","dst":"b","w":1e-400}`,
	} {
		f.Add([]byte(s))
	}
	f.Fuzz(func(t *testing.T, line []byte) {
		var ev Event
		err := DecodeJSON(line, &ev)
		if err != nil {
			de, ok := err.(*DecodeError)
			if !ok || de.Err == nil || de.Reason == "" || !bytes.Equal(de.Raw, line) {
				t.Fatalf("bad error %#v", err)
			}
			return
		}
		checkValid(t, string(line), &ev)
		if !json.Valid(line) {
			t.Fatalf("accepted %q, which is not JSON", line)
		}
		var ref refEvent
		if err := json.Unmarshal(line, &ref); err != nil {
			t.Fatalf("accepted %q; encoding/json: %v", line, err)
		}
		op := "add"
		if ref.Op != nil {
			op = *ref.Op
		}
		if op != ev.Op.String() || ref.Src == nil || *ref.Src != ev.Src {
			t.Fatalf("%q: op/src %+v, encoding/json %v %v", line, ev, op, ref.Src)
		}
		if (ref.Dst == nil && ev.Dst != "") || (ref.Dst != nil && *ref.Dst != ev.Dst) {
			t.Fatalf("%q: dst %q, encoding/json %v", line, ev.Dst, ref.Dst)
		}
		if (ref.W != nil) != ev.HasW || (ref.W != nil && *ref.W != ev.W) {
			t.Fatalf("%q: w %v/%v, encoding/json %v", line, ev.W, ev.HasW, ref.W)
		}
		if (ref.TS != nil) != ev.HasTS {
			t.Fatalf("%q: ts presence differs", line)
		}
		if ref.TS != nil {
			var want int64
			if ref.TS[0] == '"' {
				var s string
				if err := json.Unmarshal(ref.TS, &s); err != nil {
					t.Fatal(err)
				}
				tm, err := time.Parse(time.RFC3339Nano, s)
				if err != nil {
					t.Fatalf("%q: accepted ts that time.Parse rejects: %v", line, err)
				}
				want = tm.UnixMilli()
			} else {
				want, err = strconv.ParseInt(string(ref.TS), 10, 64)
				if err != nil {
					t.Fatalf("%q: accepted ts %s: %v", line, ref.TS, err)
				}
			}
			if want != ev.TS {
				t.Fatalf("%q: ts %d, reference %d", line, ev.TS, want)
			}
		}
	})
}

// benchJSONLines are realistic event lines: account-like ids, a weight,
// an RFC 3339 time on half of them (invented data).
func benchJSONLines(n int) [][]byte {
	lines := make([][]byte, n)
	for i := range lines {
		u, v := (i*7919)%100000, (i*104729+13)%100000
		switch i % 4 {
		case 0:
			lines[i] = fmt.Appendf(nil, `{"op":"add","src":"acct-%d","dst":"acct-%d","w":%d.25,"ts":"2026-11-30T08:%02d:%02dZ"}`, u, v, i%1000, i%60, (i/60)%60)
		case 1:
			lines[i] = fmt.Appendf(nil, `{"src":"acct-%d","dst":"acct-%d","w":1,"ts":%d}`, u, v, 1796026502000+int64(i))
		case 2:
			lines[i] = fmt.Appendf(nil, `{"op":"add","src":"card-%d","dst":"merchant-%d","ts":"2026-11-30T08:15:02.%03d+01:00"}`, u, v, i%1000)
		default:
			lines[i] = fmt.Appendf(nil, `{"op":"remove","src":"acct-%d","dst":"acct-%d"}`, u, v)
		}
	}
	return lines
}

// BenchmarkDecodeJSON measures the hand-written decoder on single lines,
// with the ids turned into strings as Reader.Next does.
func BenchmarkDecodeJSON(b *testing.B) {
	lines := benchJSONLines(4096)
	var d jsonDecoder
	var r rawEvent
	var ev Event
	var n int64
	b.ReportAllocs()
	for b.Loop() {
		line := lines[n%int64(len(lines))]
		if f := d.decode(line, &r); !f.ok() {
			b.Fatal(f.reason)
		}
		r.toEvent(&ev)
		n++
	}
	b.ReportMetric(float64(n)/b.Elapsed().Seconds(), "events/s")
}

// BenchmarkDecodeJSONStdlib is the same lines through encoding/json into
// the reference struct, for comparison (it does less validation).
func BenchmarkDecodeJSONStdlib(b *testing.B) {
	lines := benchJSONLines(4096)
	var n int64
	b.ReportAllocs()
	for b.Loop() {
		var ref refEvent
		if err := json.Unmarshal(lines[n%int64(len(lines))], &ref); err != nil {
			b.Fatal(err)
		}
		n++
	}
	b.ReportMetric(float64(n)/b.Elapsed().Seconds(), "events/s")
}
