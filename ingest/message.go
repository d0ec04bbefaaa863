package ingest

import (
	"bytes"
	"sync"
)

// DecodeMessage decodes a message (a NATS payload, an HTTP body) that
// carries one event or many lines of JSON lines or of an edge list (the
// format is detected from the first line that is neither blank nor a
// comment, as [Auto] does; numeric edge-list times are milliseconds). It
// appends the good events to dst[:0] and returns it, with one *DecodeError
// per bad line (Line is the line number within the message, Raw the line;
// File is empty for the caller to fill in). A UTF-8 BOM at the start, CRLF
// line endings, blank lines and '#' comment lines are accepted.
//
// With dst reused from call to call, the only allocation per event is one
// string holding both ids; bad lines allocate their error.
func DecodeMessage(data []byte, dst []Event) ([]Event, []*DecodeError) {
	dst = dst[:0]
	var errs []*DecodeError
	d := decoders.Get().(*jsonDecoder)
	defer func() {
		d.line = nil // do not keep the message alive
		if cap(d.scratch) > 64<<10 || cap(d.key) > 64<<10 {
			d.scratch, d.key = nil, nil
		}
		decoders.Put(d)
	}()
	var raw rawEvent
	format := Auto
	lineNo := 0
	for len(data) > 0 {
		var line []byte
		if i := bytes.IndexByte(data, '\n'); i >= 0 {
			line, data = data[:i], data[i+1:]
		} else {
			line, data = data, nil
		}
		lineNo++
		if len(line) > 0 && line[len(line)-1] == '\r' {
			line = line[:len(line)-1]
		}
		if lineNo == 1 && bytes.HasPrefix(line, bom) {
			line = line[len(bom):]
		}
		i := skipBlank(line, 0)
		if i == len(line) || line[i] == '#' {
			continue
		}
		if format == Auto {
			format = detect(line[i])
		}
		var f failure
		if format == JSONLines {
			f = d.decode(line, &raw)
		} else {
			f = decodeEdgeList(line, EdgeListOptions{}, &raw)
		}
		if !f.ok() {
			errs = append(errs, f.toError("", lineNo, line))
			continue
		}
		dst = append(dst, Event{})
		raw.toEvent(&dst[len(dst)-1])
	}
	return dst, errs
}

// decoders recycles JSON decoders and their scratch space across messages,
// which may be decoded from many goroutines at once.
var decoders = sync.Pool{New: func() any { return new(jsonDecoder) }}
