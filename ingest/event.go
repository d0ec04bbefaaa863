package ingest

import (
	"fmt"
	"math"
	"strconv"
	"unicode/utf8"
)

// MaxIDBytes is the longest external node id accepted, in bytes.
const MaxIDBytes = 256

// Op is what an [Event] does to the graph. The zero value is OpAdd.
type Op uint8

const (
	// OpAdd adds W (1 when not given) to the weight of the edge Src-Dst;
	// repeated adds accumulate, as parallel edges do in a multigraph.
	OpAdd Op = iota
	// OpRemove deletes the edge Src-Dst, or, with W, subtracts W from its
	// weight (the edge goes when nothing is left).
	OpRemove
	// OpSet sets the weight of Src-Dst to W (required; 0 deletes the edge).
	OpSet
	// OpNodeRemove deletes the node Src and all its edges. Dst is empty and
	// W is not given.
	OpNodeRemove
	numOps
)

var opNames = [numOps]string{"add", "remove", "set", "node-remove"}

// String returns "add", "remove", "set" or "node-remove" (the JSON spelling).
func (o Op) String() string {
	if o < numOps {
		return opNames[o]
	}
	return "op(" + strconv.Itoa(int(o)) + ")"
}

// opFromBytes maps a JSON op value to an Op.
func opFromBytes(b []byte) (Op, bool) {
	switch string(b) { // no allocation: the compiler compares in place
	case "add":
		return OpAdd, true
	case "remove":
		return OpRemove, true
	case "set":
		return OpSet, true
	case "node-remove":
		return OpNodeRemove, true
	}
	return 0, false
}

// Event is one edge event, as decoded from a JSON line or an edge-list line.
//
// Validity rules (enforced by every decoder and by [Event.Validate]):
//   - Src is 1..MaxIDBytes bytes of valid UTF-8 without control characters
//     (U+0000..U+001F, U+007F); Dst likewise, except that it is empty for
//     OpNodeRemove and only there.
//   - When HasW, W is finite and > 0; for OpSet, W >= 0 (0 deletes). OpSet
//     requires HasW; OpNodeRemove forbids it. Without HasW, OpAdd adds 1 and
//     OpRemove deletes the edge.
//   - TS is Unix milliseconds when HasTS; without it the time is the
//     caller's business (arrival time, for the daemon).
type Event struct {
	Op       Op
	Src, Dst string
	W        float64
	HasW     bool
	TS       int64
	HasTS    bool
}

// Validate checks e against the validity rules above. The error is a
// *DecodeError (no file or line) that unwraps to the sentinel. Use it on
// events built in code; decoded events are valid already.
func (e *Event) Validate() error {
	if f := e.check(); !f.ok() {
		return f.toError("", 0, nil)
	}
	return nil
}

func (e *Event) check() failure {
	if e.Op >= numOps {
		return fail(ErrUnknownOp, "op", fmt.Sprintf("unknown op %d", e.Op))
	}
	if f := checkIDString("src", e.Src); !f.ok() {
		return f
	}
	if e.Op == OpNodeRemove {
		if e.Dst != "" {
			return fail(ErrUnknownField, "dst", "not allowed for node-remove")
		}
		if e.HasW {
			return fail(ErrBadWeight, "w", "not allowed for node-remove")
		}
		return failure{}
	}
	if f := checkIDString("dst", e.Dst); !f.ok() {
		return f
	}
	if e.Op == OpSet && !e.HasW {
		return fail(ErrMissingField, "w", "required for set")
	}
	if e.HasW {
		w := e.W
		if math.IsNaN(w) || math.IsInf(w, 0) {
			return fail(ErrBadWeight, "w", "not finite")
		}
		if e.Op == OpSet {
			if w < 0 {
				return fail(ErrBadWeight, "w", "must be >= 0, got "+strconv.FormatFloat(w, 'g', -1, 64))
			}
		} else if w <= 0 {
			return fail(ErrBadWeight, "w", "must be > 0, got "+strconv.FormatFloat(w, 'g', -1, 64))
		}
	}
	return failure{}
}

func checkIDString(field, s string) failure {
	switch {
	case s == "":
		return fail(ErrEmptyID, field, "empty")
	case len(s) > MaxIDBytes:
		return fail(ErrIDTooLong, field, idTooLongReason(len(s)))
	case !utf8.ValidString(s):
		return fail(ErrBadEncoding, field, "invalid UTF-8")
	}
	for i := 0; i < len(s); i++ {
		if isControl(s[i]) {
			return fail(ErrBadEncoding, field, controlReason(s[i]))
		}
	}
	return failure{}
}

// checkID checks a decoded id (already known to be valid UTF-8).
func checkID(field string, b []byte) failure {
	switch {
	case len(b) == 0:
		return fail(ErrEmptyID, field, "empty")
	case len(b) > MaxIDBytes:
		return fail(ErrIDTooLong, field, idTooLongReason(len(b)))
	}
	for _, c := range b {
		if isControl(c) {
			return fail(ErrBadEncoding, field, controlReason(c))
		}
	}
	return failure{}
}

func idTooLongReason(n int) string {
	return fmt.Sprintf("%d bytes, longer than %d", n, MaxIDBytes)
}

func controlReason(c byte) string {
	return fmt.Sprintf("control character 0x%02x", c)
}

// isControl reports the C0 controls and DEL. Such bytes never belong in an
// id (they break every line-oriented output) and signal binary input.
func isControl(c byte) bool { return c < 0x20 || c == 0x7f }

// rawEvent is an Event whose ids are byte slices into the line or into the
// decoder's scratch space, valid until the next decode. It lets the loader
// intern ids without allocating a string per event.
type rawEvent struct {
	op       Op
	src, dst []byte
	w        float64
	hasW     bool
	ts       int64
	hasTS    bool
}

// toEvent fills ev from r, allocating one string that holds both ids.
func (r *rawEvent) toEvent(ev *Event) {
	var buf [2 * MaxIDBytes]byte
	n := copy(buf[:], r.src)
	n += copy(buf[n:], r.dst)
	s := string(buf[:n])
	ev.Op = r.op
	ev.Src = s[:len(r.src)]
	ev.Dst = s[len(r.src):]
	ev.W, ev.HasW = r.w, r.hasW
	ev.TS, ev.HasTS = r.ts, r.hasTS
}
