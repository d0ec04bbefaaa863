package ingest

import (
	"errors"
	"strconv"
	"strings"
)

// Sentinel errors. Every *DecodeError unwraps to exactly one of them, so
// callers branch with errors.Is.
var (
	// ErrSyntax: the line is not well-formed (JSON syntax, a value of the
	// wrong type, a duplicate field, too many columns, trailing data).
	ErrSyntax = errors.New("ingest: syntax error")
	// ErrUnknownOp: the op field names no known operation.
	ErrUnknownOp = errors.New("ingest: unknown op")
	// ErrUnknownField: a JSON field that the event model does not have, or
	// one that the op does not take (dst on node-remove).
	ErrUnknownField = errors.New("ingest: unknown field")
	// ErrMissingField: a required field (src, dst, w for set) is absent.
	ErrMissingField = errors.New("ingest: missing field")
	// ErrEmptyID: src or dst is the empty string.
	ErrEmptyID = errors.New("ingest: empty id")
	// ErrIDTooLong: src or dst is longer than MaxIDBytes.
	ErrIDTooLong = errors.New("ingest: id too long")
	// ErrBadWeight: the weight is not a number, not finite, out of range
	// for the op, or given where the op takes none.
	ErrBadWeight = errors.New("ingest: bad weight")
	// ErrBadTime: the time is neither RFC 3339 nor an integer Unix time, or
	// out of range.
	ErrBadTime = errors.New("ingest: bad time")
	// ErrBadEncoding: invalid UTF-8, a control character (binary data), a
	// lone UTF-16 surrogate in a \u escape.
	ErrBadEncoding = errors.New("ingest: bad encoding")
	// ErrLineTooLong: a line is longer than ReaderOptions.MaxLineBytes.
	ErrLineTooLong = errors.New("ingest: line too long")
)

// DecodeError reports one bad input line. It is returned by the decoders,
// by [Reader.Next], by [DecodeMessage] (one per bad line) and by [Load]
// (the first bad line). Error() reads
//
//	karate.tsv:12: weight: not a number "abc"
//
// that is File:Line, then Field (when the fault lies in one field), then
// Reason. Without a File it reads "ingest: line 12: ...", without a Line
// "ingest: ...". Unwrap returns Err, one of the package's sentinels.
type DecodeError struct {
	// File names the input (ReaderOptions.Name); empty for messages.
	File string
	// Line is the 1-based line number within the file or message; 0 when
	// a single line was decoded on its own.
	Line int
	// Field is the JSON key ("op", "src", "dst", "w", "ts") or the
	// edge-list column ("src", "dst", "weight", "time") at fault, or empty
	// when the fault is in the line as a whole.
	Field string
	// Reason says what is wrong, in words, quoting the offending value.
	Reason string
	// Raw is a copy of the line without its line ending (for an over-long
	// line, its first MaxLineBytes bytes).
	Raw []byte
	// Err is the sentinel (ErrSyntax, ErrBadWeight, ...).
	Err error
}

var _ error = (*DecodeError)(nil)

// Error implements error.
func (e *DecodeError) Error() string {
	var b strings.Builder
	switch {
	case e.File != "":
		b.WriteString(e.File)
		if e.Line > 0 {
			b.WriteByte(':')
			b.WriteString(strconv.Itoa(e.Line))
		}
	case e.Line > 0:
		b.WriteString("ingest: line ")
		b.WriteString(strconv.Itoa(e.Line))
	default:
		b.WriteString("ingest")
	}
	b.WriteString(": ")
	if e.Field != "" {
		b.WriteString(e.Field)
		b.WriteString(": ")
	}
	b.WriteString(e.Reason)
	return b.String()
}

// Unwrap returns the sentinel.
func (e *DecodeError) Unwrap() error { return e.Err }

// failure is a decode fault before it is given a file, a line and the raw
// bytes. The zero value (err == nil) means success; it is returned by value
// so that the success path does not allocate.
type failure struct {
	err    error
	field  string
	reason string
}

func (f failure) ok() bool { return f.err == nil }

func fail(err error, field, reason string) failure {
	return failure{err: err, field: field, reason: reason}
}

// toError turns a failure into a *DecodeError, copying raw.
func (f failure) toError(file string, line int, raw []byte) *DecodeError {
	return &DecodeError{
		File:   file,
		Line:   line,
		Field:  f.field,
		Reason: f.reason,
		Raw:    append([]byte(nil), raw...),
		Err:    f.err,
	}
}
