package events

import (
	"errors"
	"fmt"
	"io"
	"os"
)

// ErrClosed is returned by a sink used after Close.
var ErrClosed = errors.New("events: sink closed")

// JSONLWriter writes events as JSON lines, one Write call per event, to a
// writer (stdout) or to a file it owns. Not goroutine-safe.
type JSONLWriter struct {
	w      io.Writer
	f      *os.File // owned file, nil for a borrowed writer
	closed bool
}

// NewJSONLWriter writes to w, which it does not own: Close does not close w.
func NewJSONLWriter(w io.Writer) *JSONLWriter { return &JSONLWriter{w: w} }

// OpenJSONL opens (creating if needed, mode 0600: member ids can be personal
// data) the file at path for appending; Close syncs and closes it.
func OpenJSONL(path string) (*JSONLWriter, error) {
	f, err := os.OpenFile(path, os.O_WRONLY|os.O_CREATE|os.O_APPEND, 0o600)
	if err != nil {
		return nil, fmt.Errorf("events: open %s: %w", path, err)
	}
	return &JSONLWriter{w: f, f: f}, nil
}

// Write appends one event line.
func (s *JSONLWriter) Write(ev *Event) error {
	if s.closed {
		return ErrClosed
	}
	return Encode(s.w, ev)
}

// WriteAll appends the events in order and stops at the first error.
func (s *JSONLWriter) WriteAll(evs []Event) error {
	for i := range evs {
		if err := s.Write(&evs[i]); err != nil {
			return err
		}
	}
	return nil
}

// Close syncs and closes an owned file; a second call returns ErrClosed.
func (s *JSONLWriter) Close() error {
	if s.closed {
		return ErrClosed
	}
	s.closed = true
	if s.f == nil {
		return nil
	}
	return errors.Join(s.f.Sync(), s.f.Close())
}

var _ io.Closer = (*JSONLWriter)(nil)
