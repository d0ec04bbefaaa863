package ingest

import (
	"bytes"
	"errors"
	"fmt"
	"testing"
)

func TestDecodeMessageOneEvent(t *testing.T) {
	evs, errs := DecodeMessage([]byte(`{"op":"set","src":"svc-cart","dst":"svc-price","w":42}`), nil)
	if len(errs) != 0 || len(evs) != 1 || evs[0] != (Event{Op: OpSet, Src: "svc-cart", Dst: "svc-price", W: 42, HasW: true}) {
		t.Fatalf("%+v %v", evs, errs)
	}
}

func TestDecodeMessageLines(t *testing.T) {
	msg := "\xef\xbb\xbf" + `{"src":"a","dst":"b"}` + "\r\n" +
		`{"src":"a","dst":"b","w":-1}` + "\n" +
		"\n# note\n" +
		`{"op":"remove","src":"a","dst":"b"}` + "\n" +
		`{"src":"a","dst":"b","colour":"red"}` + "\r\n"
	evs, errs := DecodeMessage([]byte(msg), make([]Event, 7))
	want := []Event{{Src: "a", Dst: "b"}, {Op: OpRemove, Src: "a", Dst: "b"}}
	if fmt.Sprint(evs) != fmt.Sprint(want) {
		t.Errorf("events %+v, want %+v", evs, want)
	}
	wantErrs := []struct {
		text string
		raw  string
		is   error
	}{
		{`ingest: line 2: w: must be > 0, got -1`, `{"src":"a","dst":"b","w":-1}`, ErrBadWeight},
		{`ingest: line 6: unknown field "colour"`, `{"src":"a","dst":"b","colour":"red"}`, ErrUnknownField},
	}
	if len(errs) != len(wantErrs) {
		t.Fatalf("errors %v", errs)
	}
	for i, w := range wantErrs {
		if errs[i].Error() != w.text || string(errs[i].Raw) != w.raw || !errors.Is(errs[i], w.is) {
			t.Errorf("error %d: %v raw %q", i, errs[i], errs[i].Raw)
		}
	}

	// Edge-list messages: detected, numeric times in milliseconds.
	evs, errs = DecodeMessage([]byte("# u v w ts\na,b,2,1700000000000\nc d x\ne f\n"), evs)
	if len(evs) != 2 || evs[0] != (Event{Src: "a", Dst: "b", W: 2, HasW: true, TS: 1700000000000, HasTS: true}) ||
		evs[1] != (Event{Src: "e", Dst: "f"}) {
		t.Errorf("%+v", evs)
	}
	if len(errs) != 1 || errs[0].Error() != `ingest: line 3: weight: not a number "x"` {
		t.Errorf("%v", errs)
	}

	// Empty and comment-only messages carry nothing.
	for _, m := range []string{"", "\n\n", "# nothing\r\n"} {
		if evs, errs := DecodeMessage([]byte(m), nil); len(evs) != 0 || errs != nil {
			t.Errorf("%q: %v %v", m, evs, errs)
		}
	}
}

func TestDecodeMessageRawIsCopied(t *testing.T) {
	msg := []byte(`{"src":"a","dst":"b","w":"heavy"}`)
	_, errs := DecodeMessage(msg, nil)
	copy(msg, bytes.Repeat([]byte("X"), len(msg)))
	if len(errs) != 1 || string(errs[0].Raw) != `{"src":"a","dst":"b","w":"heavy"}` {
		t.Fatalf("%v", errs)
	}
}

func TestDecodeMessageAllocs(t *testing.T) {
	// With dst reused, one allocation per event (the ids' string), none
	// per message, for plain ids and for escaped ones.
	for name, line := range map[string]string{
		"plain":   `{"op":"add","src":"acct-1093","dst":"acct-2210","w":125.0,"ts":"2026-11-30T08:15:02Z"}`,
		"escaped": `{"src":"caf\u00e9-\ud83d\ude00","dst":"a\"b","ts":1796026502000}`,
		"edge":    "acct-1093\tacct-2210\t125",
	} {
		msg := bytes.Repeat([]byte(line+"\n"), 100)
		dst := make([]Event, 0, 100)
		allocs := testing.AllocsPerRun(50, func() {
			var errs []*DecodeError
			dst, errs = DecodeMessage(msg, dst)
			if len(dst) != 100 || errs != nil {
				t.Fatal(errs)
			}
		})
		if allocs > 100 {
			t.Errorf("%s: %v allocations for 100 events", name, allocs)
		}
	}
}

func FuzzDecodeMessage(f *testing.F) {
	f.Add([]byte("{\"src\":\"a\",\"dst\":\"b\"}\r\n{\"src\":1}\n\n# c\n"))
	f.Add([]byte("\xef\xbb\xbfa b 1\nc\n"))
	f.Fuzz(func(t *testing.T, msg []byte) {
		evs, errs := DecodeMessage(msg, nil)
		// Every line that is neither blank nor a comment gives exactly one
		// event or one error, errors in line order.
		lines := bytes.Split(msg, []byte("\n"))
		n := 0
		for i, l := range lines {
			l = bytes.TrimSuffix(l, []byte("\r"))
			if i == 0 {
				l = bytes.TrimPrefix(l, bom)
			}
			if s := bytes.TrimLeft(l, " \t"); len(s) > 0 && s[0] != '#' {
				n++
			}
		}
		if len(evs)+len(errs) != n {
			t.Fatalf("%d events + %d errors for %d lines", len(evs), len(errs), n)
		}
		for i := range evs {
			checkValid(t, string(msg), &evs[i])
		}
		for i, e := range errs {
			if e.Line < 1 || e.Line > len(lines) || (i > 0 && e.Line <= errs[i-1].Line) || !errors.Is(e, e.Err) {
				t.Fatalf("error %v", e)
			}
		}
	})
}

// BenchmarkDecodeMessage is the NATS path: a message of 100 JSON lines
// decoded into a reused slice.
func BenchmarkDecodeMessage(b *testing.B) {
	lines := benchJSONLines(1000)
	var msgs [][]byte
	for i := 0; i < len(lines); i += 100 {
		msgs = append(msgs, append(bytes.Join(lines[i:i+100], []byte("\n")), '\n'))
	}
	dst := make([]Event, 0, 100)
	var n int64
	b.ReportAllocs()
	for b.Loop() {
		var errs []*DecodeError
		dst, errs = DecodeMessage(msgs[n/100%int64(len(msgs))], dst)
		if errs != nil {
			b.Fatal(errs[0])
		}
		n += int64(len(dst))
	}
	b.ReportMetric(float64(n)/b.Elapsed().Seconds(), "events/s")
}
