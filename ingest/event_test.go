package ingest

import (
	"errors"
	"math"
	"strings"
	"testing"
)

func TestOpString(t *testing.T) {
	// The JSON spellings of the ops (doc.go, Event model).
	for op, want := range map[Op]string{OpAdd: "add", OpRemove: "remove", OpSet: "set", OpNodeRemove: "node-remove", 9: "op(9)"} {
		if op.String() != want {
			t.Errorf("%d: %q", op, op.String())
		}
	}
	var zero Event
	if zero.Op != OpAdd {
		t.Error("the zero Op is not add")
	}
}

func TestEventValidate(t *testing.T) {
	ok := []Event{
		{Src: "a", Dst: "b"},
		{Op: OpSet, Src: "a", Dst: "b", HasW: true},
		{Op: OpRemove, Src: "a", Dst: "b", W: 0.5, HasW: true},
		{Op: OpNodeRemove, Src: "a", TS: 5, HasTS: true},
		{Src: strings.Repeat("é", 128), Dst: "😀"},
	}
	for _, ev := range ok {
		if err := ev.Validate(); err != nil {
			t.Errorf("%+v: %v", ev, err)
		}
	}
	bad := []struct {
		ev   Event
		want string
		is   error
	}{
		{Event{Dst: "b"}, "ingest: src: empty", ErrEmptyID},
		{Event{Src: "a"}, "ingest: dst: empty", ErrEmptyID},
		{Event{Src: strings.Repeat("x", 257), Dst: "b"}, "ingest: src: 257 bytes, longer than 256", ErrIDTooLong},
		{Event{Src: "a\xff", Dst: "b"}, "ingest: src: invalid UTF-8", ErrBadEncoding},
		{Event{Src: "a", Dst: "b\n"}, "ingest: dst: control character 0x0a", ErrBadEncoding},
		{Event{Op: 7, Src: "a", Dst: "b"}, "ingest: op: unknown op 7", ErrUnknownOp},
		{Event{Op: OpSet, Src: "a", Dst: "b"}, "ingest: w: required for set", ErrMissingField},
		{Event{Op: OpSet, Src: "a", Dst: "b", W: -1, HasW: true}, "ingest: w: must be >= 0, got -1", ErrBadWeight},
		{Event{Src: "a", Dst: "b", W: 0, HasW: true}, "ingest: w: must be > 0, got 0", ErrBadWeight},
		{Event{Src: "a", Dst: "b", W: math.NaN(), HasW: true}, "ingest: w: not finite", ErrBadWeight},
		{Event{Src: "a", Dst: "b", W: math.Inf(1), HasW: true}, "ingest: w: not finite", ErrBadWeight},
		{Event{Op: OpNodeRemove, Src: "a", Dst: "b"}, "ingest: dst: not allowed for node-remove", ErrUnknownField},
		{Event{Op: OpNodeRemove, Src: "a", W: 1, HasW: true}, "ingest: w: not allowed for node-remove", ErrBadWeight},
	}
	for _, c := range bad {
		err := c.ev.Validate()
		if err == nil || err.Error() != c.want || !errors.Is(err, c.is) {
			t.Errorf("%+v: %v, want %s", c.ev, err, c.want)
		}
	}
}

func TestParseNames(t *testing.T) {
	for _, f := range []Format{Auto, EdgeList, JSONLines} {
		if g, err := ParseFormat(f.String()); err != nil || g != f {
			t.Errorf("format %v: %v %v", f, g, err)
		}
	}
	for _, u := range []TimeUnit{Milliseconds, Seconds} {
		if g, err := ParseTimeUnit(u.String()); err != nil || g != u {
			t.Errorf("unit %v: %v %v", u, g, err)
		}
	}
	for _, c := range []Columns{ColumnsWeightTime, ColumnsTime} {
		if g, err := ParseColumns(c.String()); err != nil || g != c {
			t.Errorf("columns %v: %v %v", c, g, err)
		}
	}
	if _, err := ParseFormat("xml"); err == nil {
		t.Error("xml accepted")
	}
	if _, err := ParseTimeUnit("h"); err == nil {
		t.Error("h accepted")
	}
	if _, err := ParseColumns("src,dst"); err == nil {
		t.Error("src,dst accepted")
	}
}
