package ingest

import (
	"fmt"
	"math"
	"strconv"
	"unicode/utf8"
)

// TimeUnit is the unit of numeric times in edge lists. JSON lines always
// give numeric times in Unix milliseconds.
type TimeUnit uint8

const (
	// Milliseconds: numeric edge-list times are Unix milliseconds (the
	// default, as in JSON lines).
	Milliseconds TimeUnit = iota
	// Seconds: numeric edge-list times are Unix seconds (the SNAP temporal
	// files); they are multiplied by 1000.
	Seconds
	numTimeUnits
)

// String returns "ms" or "s".
func (u TimeUnit) String() string {
	switch u {
	case Milliseconds:
		return "ms"
	case Seconds:
		return "s"
	}
	return "timeunit(" + strconv.Itoa(int(u)) + ")"
}

// ParseTimeUnit reads "ms" (or "milliseconds") and "s" (or "seconds").
func ParseTimeUnit(s string) (TimeUnit, error) {
	switch s {
	case "ms", "milliseconds":
		return Milliseconds, nil
	case "s", "seconds":
		return Seconds, nil
	}
	return 0, fmt.Errorf("ingest: unknown time unit %q (want ms or s)", s)
}

// Columns is the column layout of an edge list.
type Columns uint8

const (
	// ColumnsWeightTime is "src dst [w [ts]]" (the default).
	ColumnsWeightTime Columns = iota
	// ColumnsTime is "src dst [ts]": no weight column, every line adds 1.
	// The SNAP temporal files (collegemsg.tsv, the email-Eu-core files)
	// have this layout; read as ColumnsWeightTime their times would become
	// weights.
	ColumnsTime
	numColumns
)

// String returns "src,dst,w,ts" or "src,dst,ts".
func (c Columns) String() string {
	switch c {
	case ColumnsWeightTime:
		return "src,dst,w,ts"
	case ColumnsTime:
		return "src,dst,ts"
	}
	return "columns(" + strconv.Itoa(int(c)) + ")"
}

// ParseColumns reads the names that String returns.
func ParseColumns(s string) (Columns, error) {
	switch s {
	case "src,dst,w,ts":
		return ColumnsWeightTime, nil
	case "src,dst,ts":
		return ColumnsTime, nil
	}
	return 0, fmt.Errorf("ingest: unknown edge-list columns %q (want src,dst,w,ts or src,dst,ts)", s)
}

// EdgeListOptions say how to read an edge-list line. The zero value reads
// "src dst [w [ts]]" with numeric times in milliseconds.
type EdgeListOptions struct {
	// TimeUnit of numeric times. Default Milliseconds.
	TimeUnit TimeUnit
	// Columns is the layout. Default ColumnsWeightTime.
	Columns Columns
}

// DecodeEdgeList decodes one edge-list line ("src dst [w [ts]]", or
// "src dst [ts]" with ColumnsTime; without its line ending) into ev. The
// event is always an add. Fields are separated by spaces or tabs, or by
// one comma with optional spaces or tabs around it; two commas in a row
// make an empty field, which is an error. Numeric times are read in
// o.TimeUnit; RFC 3339 times are accepted as well. Blank and comment lines
// are errors here ([Reader] and [DecodeMessage] skip them). On failure the
// error is a *DecodeError without File or Line.
func DecodeEdgeList(line []byte, o EdgeListOptions, ev *Event) error {
	var r rawEvent
	if f := decodeEdgeList(line, o, &r); !f.ok() {
		return f.toError("", 0, line)
	}
	r.toEvent(ev)
	return nil
}

// decodeEdgeList parses line into r; r's ids point into line.
func decodeEdgeList(line []byte, o EdgeListOptions, r *rawEvent) failure {
	*r = rawEvent{}
	if !utf8.Valid(line) {
		return badUTF8(line)
	}
	i := skipBlank(line, 0)
	if i == len(line) {
		return fail(ErrSyntax, "", "blank line")
	}
	if line[i] == '#' {
		return fail(ErrSyntax, "", "comment line")
	}
	var fields [4][]byte
	var quoted [4]bool
	n := 0
	for {
		j := i
		q := false
	scan:
		for j < len(line) {
			switch edgeByte[line[j]] {
			case ebSep:
				break scan
			case ebControl:
				return fail(ErrBadEncoding, "", fmt.Sprintf("control character 0x%02x at column %d", line[j], j+1))
			case ebQuote:
				q = true
			}
			j++
		}
		if n < len(fields) {
			fields[n], quoted[n] = line[i:j], q
		}
		n++
		k := skipBlank(line, j)
		if k < len(line) && line[k] == ',' {
			k = skipBlank(line, k+1)
			if k == len(line) { // "a,b," ends in an empty field
				if n < len(fields) {
					fields[n] = line[k:k]
				}
				n++
				break
			}
		}
		if k == len(line) {
			break
		}
		i = k
	}
	maxFields := len(fields)
	if o.Columns == ColumnsTime {
		maxFields = 3
	}
	if n > maxFields {
		return fail(ErrSyntax, "", fmt.Sprintf("too many fields (%d, want at most %d)", n, maxFields))
	}
	if f := checkEdgeListID("src", fields[0], quoted[0]); !f.ok() {
		return f
	}
	if n < 2 {
		return fail(ErrMissingField, "dst", "missing")
	}
	if f := checkEdgeListID("dst", fields[1], quoted[1]); !f.ok() {
		return f
	}
	r.op = OpAdd
	r.src, r.dst = fields[0], fields[1]
	tsField := 3
	if o.Columns == ColumnsTime {
		tsField = 2
	} else if n >= 3 {
		w, f := parseEdgeListWeight(fields[2])
		if !f.ok() {
			return f
		}
		r.w, r.hasW = w, true
	}
	if n > tsField {
		ts, f := parseEdgeListTime(fields[tsField], o.TimeUnit)
		if !f.ok() {
			return f
		}
		r.ts, r.hasTS = ts, true
	}
	return failure{}
}

// Byte classes for the edge-list tokenizer.
const (
	ebPlain = iota
	ebSep
	ebControl
	ebQuote
)

var edgeByte = func() (t [256]uint8) {
	for c := range 256 {
		if isControl(byte(c)) {
			t[c] = ebControl
		}
	}
	t[' '], t['\t'], t[','], t['"'] = ebSep, ebSep, ebSep, ebQuote
	return t
}()

// checkEdgeListID checks an id that the tokenizer found free of control
// bytes: its length, and no double quote. Quoted CSV fields are not
// supported, and a quote in an edge-list id nearly always means a quoted
// field or a JSON line in an edge list, which must fail loudly rather than
// become an id such as {"src":"a".
func checkEdgeListID(field string, b []byte, quoted bool) failure {
	switch {
	case len(b) == 0:
		return fail(ErrEmptyID, field, "empty")
	case len(b) > MaxIDBytes:
		return fail(ErrIDTooLong, field, idTooLongReason(len(b)))
	case quoted:
		return fail(ErrSyntax, field, `contains '"' (quoted fields are not supported)`)
	}
	return failure{}
}

func parseEdgeListWeight(tok []byte) (float64, failure) {
	const field = "weight"
	if len(tok) == 0 {
		return 0, fail(ErrBadWeight, field, "empty")
	}
	if !isDecimal(tok) {
		if w, err := strconv.ParseFloat(string(tok), 64); err == nil && (math.IsNaN(w) || math.IsInf(w, 0)) {
			return 0, fail(ErrBadWeight, field, "not finite "+strconv.Quote(string(tok)))
		}
		return 0, fail(ErrBadWeight, field, "not a number "+strconv.Quote(string(tok)))
	}
	w, err := strconv.ParseFloat(string(tok), 64)
	if err != nil || math.IsInf(w, 0) {
		return 0, fail(ErrBadWeight, field, "not finite "+strconv.Quote(string(tok)))
	}
	if w <= 0 {
		return 0, fail(ErrBadWeight, field, "must be > 0, got "+string(tok))
	}
	return w, failure{}
}

func parseEdgeListTime(tok []byte, unit TimeUnit) (int64, failure) {
	const field = "time"
	if len(tok) == 0 {
		return 0, fail(ErrBadTime, field, "empty")
	}
	if v, ok := parseInt(tok); ok {
		if unit == Seconds {
			if v > math.MaxInt64/1000 || v < math.MinInt64/1000 {
				return 0, fail(ErrBadTime, field, "out of range "+strconv.Quote(string(tok)))
			}
			v *= 1000
		}
		return v, failure{}
	}
	if ms, ok := parseRFC3339Milli(tok); ok {
		return ms, failure{}
	}
	if isAllDigits(tok) {
		return 0, fail(ErrBadTime, field, "out of range "+strconv.Quote(string(tok)))
	}
	return 0, fail(ErrBadTime, field, "not a Unix time or an RFC 3339 time "+strconv.Quote(string(tok)))
}

func isAllDigits(b []byte) bool {
	if len(b) > 0 && b[0] == '-' {
		b = b[1:]
	}
	if len(b) == 0 {
		return false
	}
	for _, c := range b {
		if !isDigit(c) {
			return false
		}
	}
	return true
}

// isDecimal reports a plain decimal number:
// [+-]?([0-9]+(\.[0-9]*)?|\.[0-9]+)([eE][+-]?[0-9]+)?
// (no hex, no underscores, no "Inf" or "NaN").
func isDecimal(tok []byte) bool {
	i := 0
	if i < len(tok) && (tok[i] == '+' || tok[i] == '-') {
		i++
	}
	intDigits := 0
	for i < len(tok) && isDigit(tok[i]) {
		i++
		intDigits++
	}
	fracDigits := 0
	if i < len(tok) && tok[i] == '.' {
		i++
		for i < len(tok) && isDigit(tok[i]) {
			i++
			fracDigits++
		}
	}
	if intDigits+fracDigits == 0 {
		return false
	}
	if i < len(tok) && (tok[i] == 'e' || tok[i] == 'E') {
		i++
		if i < len(tok) && (tok[i] == '+' || tok[i] == '-') {
			i++
		}
		expDigits := 0
		for i < len(tok) && isDigit(tok[i]) {
			i++
			expDigits++
		}
		if expDigits == 0 {
			return false
		}
	}
	return i == len(tok)
}

// skipBlank skips spaces and tabs from i.
func skipBlank(line []byte, i int) int {
	for i < len(line) && (line[i] == ' ' || line[i] == '\t') {
		i++
	}
	return i
}
