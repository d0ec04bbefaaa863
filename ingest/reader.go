package ingest

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"strconv"
)

// Format is the layout of an input stream.
type Format uint8

const (
	// Auto detects the format from the first line that is neither blank nor
	// a comment: one that starts with '{' means JSON lines, anything else an
	// edge list.
	Auto Format = iota
	// EdgeList is "src dst [w [ts]]" per line; see [DecodeEdgeList].
	EdgeList
	// JSONLines is one flat JSON object per line; see [DecodeJSON].
	JSONLines
	numFormats
)

var formatNames = [numFormats]string{"auto", "edge-list", "json-lines"}

// String returns "auto", "edge-list" or "json-lines".
func (f Format) String() string {
	if f < numFormats {
		return formatNames[f]
	}
	return "format(" + strconv.Itoa(int(f)) + ")"
}

// ParseFormat reads the names that String returns.
func ParseFormat(s string) (Format, error) {
	for i, n := range formatNames {
		if s == n {
			return Format(i), nil
		}
	}
	return 0, fmt.Errorf("ingest: unknown format %q (want auto, edge-list or json-lines)", s)
}

// DefaultMaxLineBytes is the default ReaderOptions.MaxLineBytes.
const DefaultMaxLineBytes = 64 << 10

// ReaderOptions configure a [Reader]. The zero value works.
type ReaderOptions struct {
	// Name names the input in errors ("karate.tsv:12: ..."). Default "":
	// errors then read "ingest: line 12: ...".
	Name string
	// Format of the input. Default Auto.
	Format Format
	// TimeUnit of numeric times in edge lists. Default Milliseconds. It has
	// no effect on JSON lines, whose numeric ts is always milliseconds.
	TimeUnit TimeUnit
	// Columns is the edge-list layout. Default ColumnsWeightTime
	// ("src dst [w [ts]]"); ColumnsTime reads "src dst [ts]".
	Columns Columns
	// MaxLineBytes is the longest line accepted, without its line ending.
	// A longer line is reported as an ErrLineTooLong *DecodeError and
	// skipped. Default (and zero means) DefaultMaxLineBytes.
	MaxLineBytes int
}

// EnsureDefaults fills in the zero fields.
func (o *ReaderOptions) EnsureDefaults() {
	if o.MaxLineBytes == 0 {
		o.MaxLineBytes = DefaultMaxLineBytes
	}
}

// Validate reports every invalid field at once.
func (o *ReaderOptions) Validate() error {
	var errs []error
	if o.Format >= numFormats {
		errs = append(errs, fmt.Errorf("ingest: invalid Format %d", o.Format))
	}
	if o.TimeUnit >= numTimeUnits {
		errs = append(errs, fmt.Errorf("ingest: invalid TimeUnit %d", o.TimeUnit))
	}
	if o.Columns >= numColumns {
		errs = append(errs, fmt.Errorf("ingest: invalid Columns %d", o.Columns))
	}
	if o.MaxLineBytes < 0 {
		errs = append(errs, fmt.Errorf("ingest: MaxLineBytes %d is negative", o.MaxLineBytes))
	}
	return errors.Join(errs...)
}

// Reader reads events from a stream of lines. It is not safe for
// concurrent use.
//
// Next returns a *DecodeError for a bad line and stays usable: the next
// call goes on with the following line. Any other error (from the
// underlying reader) is returned again by every later call.
type Reader struct {
	r      io.Reader
	o      ReaderOptions
	format Format

	buf        []byte
	start, end int // unread bytes are buf[start:end]
	scanned    int // buf[start:start+scanned] holds no '\n'
	eof        bool
	err        error

	line      int
	bytesRead int64
	onRead    func(int64)

	json jsonDecoder
	raw  rawEvent
}

// NewReader returns a Reader of r. It fails only on invalid options.
func NewReader(r io.Reader, o ReaderOptions) (*Reader, error) {
	o.EnsureDefaults()
	if err := o.Validate(); err != nil {
		return nil, err
	}
	size := o.MaxLineBytes + 2 + 64<<10 // a whole line, its CR LF, and room to read
	return &Reader{r: r, o: o, format: o.Format, buf: make([]byte, size)}, nil
}

// Line returns the 1-based number of the line that the last call to Next
// read (blank and comment lines count), or 0 before the first call.
func (r *Reader) Line() int { return r.line }

// Format returns the format in use: the one given in the options, or the
// one detected (Auto until the first event line has been seen).
func (r *Reader) Format() Format { return r.format }

// BytesRead returns the number of bytes read from the underlying reader.
func (r *Reader) BytesRead() int64 { return r.bytesRead }

// Next decodes the next event into ev. It returns io.EOF at the end of the
// input, a *DecodeError for a bad line (and can be called again), or
// another error from the underlying reader.
func (r *Reader) Next(ev *Event) error {
	if err := r.next(); err != nil {
		return err
	}
	r.raw.toEvent(ev)
	return nil
}

// next decodes the next event into r.raw, whose ids stay valid until the
// following call.
func (r *Reader) next() error {
	for {
		line, err := r.readLine()
		if err != nil {
			return err
		}
		if len(line) > 0 && line[len(line)-1] == '\r' {
			line = line[:len(line)-1]
		}
		if r.line == 1 && bytes.HasPrefix(line, bom) {
			line = line[len(bom):]
		}
		if len(line) > r.o.MaxLineBytes {
			return r.tooLong(line)
		}
		i := skipBlank(line, 0)
		if i == len(line) || line[i] == '#' {
			continue
		}
		if r.format == Auto {
			r.format = detect(line[i])
		}
		var f failure
		if r.format == JSONLines {
			f = r.json.decode(line, &r.raw)
		} else {
			f = decodeEdgeList(line, EdgeListOptions{TimeUnit: r.o.TimeUnit, Columns: r.o.Columns}, &r.raw)
		}
		if !f.ok() {
			return f.toError(r.o.Name, r.line, line)
		}
		return nil
	}
}

var bom = []byte("\xef\xbb\xbf")

func detect(first byte) Format {
	if first == '{' {
		return JSONLines
	}
	return EdgeList
}

func (r *Reader) tooLong(prefix []byte) *DecodeError {
	if len(prefix) > r.o.MaxLineBytes {
		prefix = prefix[:r.o.MaxLineBytes]
	}
	f := fail(ErrLineTooLong, "", fmt.Sprintf("line longer than %d bytes", r.o.MaxLineBytes))
	return f.toError(r.o.Name, r.line, prefix)
}

// readLine returns the next line without its '\n' and counts it. The slice
// is valid until the next call. A line that does not fit in the buffer is
// skipped to its end and reported as too long.
func (r *Reader) readLine() ([]byte, error) {
	for {
		if i := bytes.IndexByte(r.buf[r.start+r.scanned:r.end], '\n'); i >= 0 {
			n := r.scanned + i
			line := r.buf[r.start : r.start+n]
			r.start += n + 1
			r.scanned = 0
			r.line++
			return line, nil
		}
		r.scanned = r.end - r.start
		if r.eof {
			if r.start == r.end {
				return nil, io.EOF
			}
			line := r.buf[r.start:r.end]
			r.start, r.scanned = r.end, 0
			r.line++
			return line, nil
		}
		if r.err != nil {
			return nil, r.err
		}
		if r.scanned > r.o.MaxLineBytes+1 { // no line ending in sight
			return nil, r.skipLongLine()
		}
		r.fill()
	}
}

// skipLongLine reports the line at r.start as too long and discards the
// input up to and including its '\n'.
func (r *Reader) skipLongLine() error {
	r.line++
	derr := r.tooLong(r.buf[r.start:r.end])
	for {
		if i := bytes.IndexByte(r.buf[r.start:r.end], '\n'); i >= 0 {
			r.start += i + 1
			r.scanned = 0
			return derr
		}
		r.start, r.end, r.scanned = 0, 0, 0
		if r.eof || r.err != nil {
			return derr
		}
		r.fill()
	}
}

// fill reads more input after buf[r.end], moving the unread bytes to the
// front first. It sets r.eof or r.err when the reader says so.
func (r *Reader) fill() {
	if r.start > 0 {
		n := copy(r.buf, r.buf[r.start:r.end])
		r.start, r.end = 0, n
	}
	for tries := 0; tries < 100; tries++ {
		n, err := r.r.Read(r.buf[r.end:])
		if n < 0 || n > len(r.buf)-r.end {
			r.err = fmt.Errorf("ingest: read %s: invalid count %d from Read", r.nameOrInput(), n)
			return
		}
		r.end += n
		r.bytesRead += int64(n)
		if n > 0 && r.onRead != nil {
			r.onRead(r.bytesRead)
		}
		if err == io.EOF {
			r.eof = true
			return
		}
		if err != nil {
			r.err = fmt.Errorf("ingest: read %s: %w", r.nameOrInput(), err)
			return
		}
		if n > 0 {
			return
		}
	}
	r.err = fmt.Errorf("ingest: read %s: %w", r.nameOrInput(), io.ErrNoProgress)
}

func (r *Reader) nameOrInput() string {
	if r.o.Name != "" {
		return r.o.Name
	}
	return "input"
}
