package ingest

import (
	"errors"
	"io"
	"strings"
	"testing"
)

// badLine is one malformed line, the exact error it must produce when read
// from a file named by the case's format, and the sentinel it unwraps to.
type badLine struct {
	name   string
	format Format
	el     EdgeListOptions
	line   string
	want   string // full Error() text from a Reader named "ev.jsonl" or "g.tsv", line 1
	is     error
}

type elo = EdgeListOptions

var long257 = strings.Repeat("x", 257)

// badLines covers both formats. The expected strings are the error
// contract of DecodeError.Error (doc.go, "Errors"); each was written down
// from that contract before the code was run.
var badLines = []badLine{
	// JSON lines.
	{"json weight string", JSONLines, elo{}, `{"src":"a","dst":"b","w":"abc"}`, `ev.jsonl:1: w: must be a number, got string`, ErrBadWeight},
	{"json weight NaN", JSONLines, elo{}, `{"src":"a","dst":"b","w":NaN}`, `ev.jsonl:1: w: not a number "NaN"`, ErrBadWeight},
	{"json weight Infinity", JSONLines, elo{}, `{"src":"a","dst":"b","w":Infinity}`, `ev.jsonl:1: w: not a number "Infinity"`, ErrBadWeight},
	{"json weight overflows to Inf", JSONLines, elo{}, `{"src":"a","dst":"b","w":1e999}`, `ev.jsonl:1: w: not finite "1e999"`, ErrBadWeight},
	{"json weight negative", JSONLines, elo{}, `{"src":"a","dst":"b","w":-2}`, `ev.jsonl:1: w: must be > 0, got -2`, ErrBadWeight},
	{"json weight zero on add", JSONLines, elo{}, `{"src":"a","dst":"b","w":0}`, `ev.jsonl:1: w: must be > 0, got 0`, ErrBadWeight},
	{"json weight zero on remove", JSONLines, elo{}, `{"op":"remove","src":"a","dst":"b","w":0}`, `ev.jsonl:1: w: must be > 0, got 0`, ErrBadWeight},
	{"json weight negative on set", JSONLines, elo{}, `{"op":"set","src":"a","dst":"b","w":-0.5}`, `ev.jsonl:1: w: must be >= 0, got -0.5`, ErrBadWeight},
	{"json weight null", JSONLines, elo{}, `{"src":"a","dst":"b","w":null}`, `ev.jsonl:1: w: must be a number, got null`, ErrBadWeight},
	{"json weight leading zero", JSONLines, elo{}, `{"src":"a","dst":"b","w":01}`, `ev.jsonl:1: w: not a number "01"`, ErrBadWeight},
	{"json weight on node-remove", JSONLines, elo{}, `{"op":"node-remove","src":"a","w":1}`, `ev.jsonl:1: w: not allowed for node-remove`, ErrBadWeight},
	{"json set without weight", JSONLines, elo{}, `{"op":"set","src":"a","dst":"b"}`, `ev.jsonl:1: w: required for set`, ErrMissingField},
	{"json missing src", JSONLines, elo{}, `{"dst":"b"}`, `ev.jsonl:1: src: missing`, ErrMissingField},
	{"json missing dst", JSONLines, elo{}, `{"src":"a"}`, `ev.jsonl:1: dst: missing`, ErrMissingField},
	{"json empty object", JSONLines, elo{}, `{}`, `ev.jsonl:1: src: missing`, ErrMissingField},
	{"json empty src", JSONLines, elo{}, `{"src":"","dst":"b"}`, `ev.jsonl:1: src: empty`, ErrEmptyID},
	{"json src too long", JSONLines, elo{}, `{"src":"` + long257 + `","dst":"b"}`, `ev.jsonl:1: src: 257 bytes, longer than 256`, ErrIDTooLong},
	{"json escaped control char in id", JSONLines, elo{}, `{"src":"a\tb","dst":"b"}`, `ev.jsonl:1: src: control character 0x09`, ErrBadEncoding},
	{"json bad time word", JSONLines, elo{}, `{"src":"a","dst":"b","ts":"yesterday"}`, `ev.jsonl:1: ts: not an RFC 3339 time "yesterday"`, ErrBadTime},
	{"json bad time Feb 30", JSONLines, elo{}, `{"src":"a","dst":"b","ts":"2026-02-30T00:00:00Z"}`, `ev.jsonl:1: ts: not an RFC 3339 time "2026-02-30T00:00:00Z"`, ErrBadTime},
	{"json bad time no zone", JSONLines, elo{}, `{"src":"a","dst":"b","ts":"2026-01-02T03:04:05"}`, `ev.jsonl:1: ts: not an RFC 3339 time "2026-01-02T03:04:05"`, ErrBadTime},
	{"json time fraction of ms", JSONLines, elo{}, `{"src":"a","dst":"b","ts":1.5}`, `ev.jsonl:1: ts: not an integer number of milliseconds "1.5"`, ErrBadTime},
	{"json time overflow", JSONLines, elo{}, `{"src":"a","dst":"b","ts":99999999999999999999}`, `ev.jsonl:1: ts: out of range "99999999999999999999"`, ErrBadTime},
	{"json time boolean", JSONLines, elo{}, `{"src":"a","dst":"b","ts":true}`, `ev.jsonl:1: ts: must be an RFC 3339 string or a number, got boolean`, ErrBadTime},
	{"json unknown op", JSONLines, elo{}, `{"op":"delete","src":"a","dst":"b"}`, `ev.jsonl:1: op: unknown op "delete" (want add, remove, set or node-remove)`, ErrUnknownOp},
	{"json empty op", JSONLines, elo{}, `{"op":"","src":"a","dst":"b"}`, `ev.jsonl:1: op: unknown op "" (want add, remove, set or node-remove)`, ErrUnknownOp},
	{"json op wrong case", JSONLines, elo{}, `{"op":"Add","src":"a","dst":"b"}`, `ev.jsonl:1: op: unknown op "Add" (want add, remove, set or node-remove)`, ErrUnknownOp},
	{"json unknown field", JSONLines, elo{}, `{"src":"a","dst":"b","weight":2}`, `ev.jsonl:1: unknown field "weight"`, ErrUnknownField},
	{"json field names are case-sensitive", JSONLines, elo{}, `{"Src":"a","dst":"b"}`, `ev.jsonl:1: unknown field "Src"`, ErrUnknownField},
	{"json dst on node-remove", JSONLines, elo{}, `{"op":"node-remove","src":"a","dst":"b"}`, `ev.jsonl:1: dst: not allowed for node-remove`, ErrUnknownField},
	{"json duplicate field", JSONLines, elo{}, `{"src":"a","src":"b","dst":"c"}`, `ev.jsonl:1: src: duplicate field`, ErrSyntax},
	{"json duplicate via escape", JSONLines, elo{}, `{"src":"a","\u0073rc":"b","dst":"c"}`, `ev.jsonl:1: src: duplicate field`, ErrSyntax},
	{"json src number", JSONLines, elo{}, `{"src":42,"dst":"b"}`, `ev.jsonl:1: src: must be a string, got number`, ErrSyntax},
	{"json dst array", JSONLines, elo{}, `{"src":"a","dst":["b"]}`, `ev.jsonl:1: dst: must be a string, got array`, ErrSyntax},
	{"json op number", JSONLines, elo{}, `{"op":1,"src":"a","dst":"b"}`, `ev.jsonl:1: op: must be a string, got number`, ErrSyntax},
	{"json bare word", JSONLines, elo{}, `{"src":abc,"dst":"b"}`, `ev.jsonl:1: src: invalid value "abc" at column 8`, ErrSyntax},
	{"json trailing garbage", JSONLines, elo{}, `{"src":"a","dst":"b"} x`, `ev.jsonl:1: trailing data after '}' at column 23`, ErrSyntax},
	{"json two objects", JSONLines, elo{}, `{"src":"a","dst":"b"}{"src":"c","dst":"d"}`, `ev.jsonl:1: trailing data after '}' at column 22`, ErrSyntax},
	{"json trailing comma", JSONLines, elo{}, `{"src":"a","dst":"b",}`, `ev.jsonl:1: expected a field name at column 22, found '}'`, ErrSyntax},
	{"json missing colon", JSONLines, elo{}, `{"src" "a","dst":"b"}`, `ev.jsonl:1: expected ':' at column 8, found '"'`, ErrSyntax},
	{"json missing comma", JSONLines, elo{}, `{"src":"a" "dst":"b"}`, `ev.jsonl:1: expected ',' or '}' at column 12, found '"'`, ErrSyntax},
	{"json truncated", JSONLines, elo{}, `{"src":"a","dst":"b"`, `ev.jsonl:1: unexpected end of line`, ErrSyntax},
	{"json unterminated string", JSONLines, elo{}, `{"src":"abc`, `ev.jsonl:1: unterminated string starting at column 8`, ErrSyntax},
	{"json not an object", JSONLines, elo{}, `["a","b"]`, `ev.jsonl:1: expected '{' at column 1, found '['`, ErrSyntax},
	{"json bad escape", JSONLines, elo{}, `{"src":"a\qb","dst":"b"}`, `ev.jsonl:1: invalid escape "\q" at column 10`, ErrSyntax},
	{"json bad unicode escape", JSONLines, elo{}, `{"src":"a\u12G4","dst":"b"}`, `ev.jsonl:1: invalid \u escape at column 10`, ErrSyntax},
	{"json lone high surrogate", JSONLines, elo{}, `{"src":"\ud800","dst":"b"}`, `ev.jsonl:1: lone surrogate \ud800 at column 9`, ErrBadEncoding},
	{"json lone low surrogate", JSONLines, elo{}, `{"src":"x\udc00","dst":"b"}`, `ev.jsonl:1: lone surrogate \udc00 at column 10`, ErrBadEncoding},
	{"json invalid UTF-8", JSONLines, elo{}, "{\"src\":\"a\xff\",\"dst\":\"b\"}", `ev.jsonl:1: invalid UTF-8 at column 10`, ErrBadEncoding},
	{"json raw control char in string", JSONLines, elo{}, "{\"src\":\"a\x01\",\"dst\":\"b\"}", `ev.jsonl:1: control character 0x01 at column 10`, ErrBadEncoding},
	{"json binary garbage", JSONLines, elo{}, "\x00\x01\x02\x03garbage", `ev.jsonl:1: control character 0x00 at column 1`, ErrBadEncoding},

	// Edge lists.
	{"edge weight not a number", EdgeList, elo{}, "a\tb\tabc", `g.tsv:1: weight: not a number "abc"`, ErrBadWeight},
	{"edge weight NaN", EdgeList, elo{}, "a b NaN", `g.tsv:1: weight: not finite "NaN"`, ErrBadWeight},
	{"edge weight Inf", EdgeList, elo{}, "a b +Inf", `g.tsv:1: weight: not finite "+Inf"`, ErrBadWeight},
	{"edge weight overflows to Inf", EdgeList, elo{}, "a b 1e400", `g.tsv:1: weight: not finite "1e400"`, ErrBadWeight},
	{"edge weight negative", EdgeList, elo{}, "a b -1", `g.tsv:1: weight: must be > 0, got -1`, ErrBadWeight},
	{"edge weight zero", EdgeList, elo{}, "a,b,0", `g.tsv:1: weight: must be > 0, got 0`, ErrBadWeight},
	{"edge weight hex", EdgeList, elo{}, "a b 0x10", `g.tsv:1: weight: not a number "0x10"`, ErrBadWeight},
	{"edge weight empty (trailing comma)", EdgeList, elo{}, "a,b,", `g.tsv:1: weight: empty`, ErrBadWeight},
	{"edge missing dst", EdgeList, elo{}, "a", `g.tsv:1: dst: missing`, ErrMissingField},
	{"edge empty src (leading comma)", EdgeList, elo{}, ",b", `g.tsv:1: src: empty`, ErrEmptyID},
	{"edge empty dst (two commas)", EdgeList, elo{}, "a,,2", `g.tsv:1: dst: empty`, ErrEmptyID},
	{"edge id too long", EdgeList, elo{}, "a " + long257, `g.tsv:1: dst: 257 bytes, longer than 256`, ErrIDTooLong},
	{"edge bad time", EdgeList, elo{}, "a b 1 yesterday", `g.tsv:1: time: not a Unix time or an RFC 3339 time "yesterday"`, ErrBadTime},
	{"edge fractional time", EdgeList, elo{}, "a b 1 1.5", `g.tsv:1: time: not a Unix time or an RFC 3339 time "1.5"`, ErrBadTime},
	{"edge time empty", EdgeList, elo{}, "a,b,1,", `g.tsv:1: time: empty`, ErrBadTime},
	{"edge time overflow in seconds", EdgeList, elo{TimeUnit: Seconds}, "a b 1 9223372036854775807", `g.tsv:1: time: out of range "9223372036854775807"`, ErrBadTime},
	{"edge time overflow", EdgeList, elo{}, "a b 1 99999999999999999999", `g.tsv:1: time: out of range "99999999999999999999"`, ErrBadTime},
	{"edge too many fields", EdgeList, elo{}, "a b 1 2 x", `g.tsv:1: too many fields (5, want at most 4)`, ErrSyntax},
	{"edge too many fields without weight column", EdgeList, elo{Columns: ColumnsTime}, "a b 1 2", `g.tsv:1: too many fields (4, want at most 3)`, ErrSyntax},
	{"edge bad time without weight column", EdgeList, elo{Columns: ColumnsTime}, "a b 1.5", `g.tsv:1: time: not a Unix time or an RFC 3339 time "1.5"`, ErrBadTime},
	{"edge quoted CSV field", EdgeList, elo{}, `"a","b",1`, `g.tsv:1: src: contains '"' (quoted fields are not supported)`, ErrSyntax},
	{"edge JSON line in an edge list", EdgeList, elo{}, `{"src":"a","dst":"b"}`, `g.tsv:1: src: contains '"' (quoted fields are not supported)`, ErrSyntax},
	{"edge NUL byte", EdgeList, elo{}, "a\x00b c", `g.tsv:1: control character 0x00 at column 2`, ErrBadEncoding},
	{"edge invalid UTF-8", EdgeList, elo{}, "a\xc3 b", `g.tsv:1: invalid UTF-8 at column 2`, ErrBadEncoding},
	{"edge binary garbage (PNG header)", EdgeList, elo{}, "\x89PNG\r\n", `g.tsv:1: invalid UTF-8 at column 1`, ErrBadEncoding},
	{"edge stray CR inside", EdgeList, elo{}, "a\rb c", `g.tsv:1: control character 0x0d at column 2`, ErrBadEncoding},
}

func TestBadLines(t *testing.T) {
	if len(badLines) < 20 {
		t.Fatalf("only %d malformed lines", len(badLines))
	}
	for _, c := range badLines {
		t.Run(c.name, func(t *testing.T) {
			name := "g.tsv"
			if c.format == JSONLines {
				name = "ev.jsonl"
			}
			rd, err := NewReader(strings.NewReader(c.line), ReaderOptions{Name: name, Format: c.format, TimeUnit: c.el.TimeUnit, Columns: c.el.Columns})
			if err != nil {
				t.Fatal(err)
			}
			var ev Event
			err = rd.Next(&ev)
			var de *DecodeError
			if !errors.As(err, &de) {
				t.Fatalf("Next = %v (%+v), want a *DecodeError", err, ev)
			}
			if got := err.Error(); got != c.want {
				t.Errorf("error\n got %s\nwant %s", got, c.want)
			}
			if !errors.Is(err, c.is) {
				t.Errorf("errors.Is(%v, %v) = false", err, c.is)
			}
			for _, other := range allSentinels {
				if other != c.is && errors.Is(err, other) {
					t.Errorf("error also matches %v", other)
				}
			}
			wantRaw := strings.TrimSuffix(strings.TrimSuffix(c.line, "\n"), "\r")
			if string(de.Raw) != wantRaw {
				t.Errorf("Raw = %q, want %q", de.Raw, wantRaw)
			}
			if de.Line != 1 || de.File != name {
				t.Errorf("File, Line = %q, %d", de.File, de.Line)
			}
			if err := rd.Next(&ev); err != io.EOF {
				t.Errorf("after the bad line: %v, want io.EOF", err)
			}

			// The single-line decoders give the same fault without a place.
			line := []byte(wantRaw)
			if c.format == JSONLines {
				err = DecodeJSON(line, &ev)
			} else {
				err = DecodeEdgeList(line, c.el, &ev)
			}
			wantBare := "ingest: " + strings.SplitN(c.want, ": ", 2)[1]
			if err == nil || err.Error() != wantBare || !errors.Is(err, c.is) {
				t.Errorf("single-line decode = %v, want %s", err, wantBare)
			}
		})
	}
}

var allSentinels = []error{ErrSyntax, ErrUnknownOp, ErrUnknownField, ErrMissingField, ErrEmptyID,
	ErrIDTooLong, ErrBadWeight, ErrBadTime, ErrBadEncoding, ErrLineTooLong}

func TestDecodeErrorText(t *testing.T) {
	// The three forms of the place prefix (doc.go, "Errors").
	cases := []struct {
		e    DecodeError
		want string
	}{
		{DecodeError{File: "karate.tsv", Line: 12, Field: "weight", Reason: `not a number "abc"`}, `karate.tsv:12: weight: not a number "abc"`},
		{DecodeError{Line: 3, Reason: `unknown field "weight"`}, `ingest: line 3: unknown field "weight"`},
		{DecodeError{Field: "src", Reason: "empty"}, `ingest: src: empty`},
		{DecodeError{File: "x.jsonl", Reason: "r"}, `x.jsonl: r`},
	}
	for _, c := range cases {
		if got := c.e.Error(); got != c.want {
			t.Errorf("got %s, want %s", got, c.want)
		}
	}
}
