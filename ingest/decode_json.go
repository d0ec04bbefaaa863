package ingest

import (
	"bytes"
	"fmt"
	"math"
	"strconv"
	"unicode/utf8"
)

// DecodeJSON decodes one JSON-lines event (a single flat object, without
// its line ending) into ev. On failure ev is left unspecified and the error
// is a *DecodeError without File or Line. It allocates one string for the
// two ids.
func DecodeJSON(line []byte, ev *Event) error {
	var d jsonDecoder
	var r rawEvent
	if f := d.decode(line, &r); !f.ok() {
		return f.toError("", 0, line)
	}
	r.toEvent(ev)
	return nil
}

// jsonDecoder decodes the flat event object by hand: it is on the ingest
// hot path, where encoding/json costs several times more. It keeps scratch
// space for unescaped strings across calls; the zero value is ready.
type jsonDecoder struct {
	line []byte
	// scratch holds unescaped src and dst; key holds an unescaped key or a
	// string value that is not an id (op, ts).
	scratch []byte
	key     []byte
}

// JSON field bits, for the duplicate check.
const (
	fOp = 1 << iota
	fSrc
	fDst
	fW
	fTS
)

// decode parses line into r. The ids in r point into line or into
// d.scratch and are valid until the next call.
func (d *jsonDecoder) decode(line []byte, r *rawEvent) failure {
	*r = rawEvent{}
	if !utf8.Valid(line) {
		return badUTF8(line)
	}
	d.line = line
	d.scratch = d.scratch[:0]
	i := skipWS(line, 0)
	if i == len(line) {
		return fail(ErrSyntax, "", "blank line")
	}
	if line[i] != '{' {
		return d.unexpected(i, "expected '{'")
	}
	i = skipWS(line, i+1)
	var seen int
	var srcS, srcE, dstS, dstE int // ranges; inScratch tells where
	var srcScr, dstScr bool
	var wTok []byte
	if i < len(line) && line[i] == '}' {
		i++
	} else {
		for {
			if i == len(line) {
				return fail(ErrSyntax, "", "unexpected end of line")
			}
			if line[i] != '"' {
				return d.unexpected(i, "expected a field name")
			}
			ks, ke, kScr, next, f := d.str(i, &d.key, false)
			if !f.ok() {
				return f
			}
			keyB := line[ks:ke]
			if kScr {
				keyB = d.key[ks:ke]
			}
			var bit int
			var field string
			switch string(keyB) {
			case "op":
				bit, field = fOp, "op"
			case "src":
				bit, field = fSrc, "src"
			case "dst":
				bit, field = fDst, "dst"
			case "w":
				bit, field = fW, "w"
			case "ts":
				bit, field = fTS, "ts"
			default:
				return fail(ErrUnknownField, "", "unknown field "+strconv.Quote(string(keyB)))
			}
			if seen&bit != 0 {
				return fail(ErrSyntax, field, "duplicate field")
			}
			seen |= bit
			i = skipWS(line, next)
			if i == len(line) {
				return fail(ErrSyntax, "", "unexpected end of line")
			}
			if line[i] != ':' {
				return d.unexpected(i, "expected ':'")
			}
			i = skipWS(line, i+1)
			if i == len(line) {
				return fail(ErrSyntax, "", "unexpected end of line")
			}
			switch bit {
			case fOp:
				if line[i] != '"' {
					return d.wrongType(i, field, ErrSyntax, "must be a string")
				}
				s, e, scr, nx, f := d.str(i, &d.key, false)
				if !f.ok() {
					return f
				}
				v := line[s:e]
				if scr {
					v = d.key[s:e]
				}
				op, ok := opFromBytes(v)
				if !ok {
					return fail(ErrUnknownOp, "op", "unknown op "+strconv.Quote(string(v))+" (want add, remove, set or node-remove)")
				}
				r.op = op
				i = nx
			case fSrc, fDst:
				if line[i] != '"' {
					return d.wrongType(i, field, ErrSyntax, "must be a string")
				}
				s, e, scr, nx, f := d.str(i, &d.scratch, true)
				if !f.ok() {
					return f
				}
				v := line[s:e]
				if scr {
					v = d.scratch[s:e]
				}
				if f := checkID(field, v); !f.ok() {
					return f
				}
				if bit == fSrc {
					srcS, srcE, srcScr = s, e, scr
				} else {
					dstS, dstE, dstScr = s, e, scr
				}
				i = nx
			case fW:
				c := line[i]
				if c == '"' || c == '{' || c == '[' {
					return d.wrongType(i, field, ErrBadWeight, "must be a number")
				}
				tok, nx := bareToken(line, i)
				if isLiteral(tok) {
					return fail(ErrBadWeight, field, "must be a number, got "+literalType(tok))
				}
				if len(tok) == 0 {
					return d.unexpected(i, "expected a value")
				}
				if !isJSONNumber(tok) {
					return fail(ErrBadWeight, field, "not a number "+strconv.Quote(string(tok)))
				}
				w, err := strconv.ParseFloat(string(tok), 64)
				if err != nil || math.IsInf(w, 0) || math.IsNaN(w) {
					return fail(ErrBadWeight, field, "not finite "+strconv.Quote(string(tok)))
				}
				r.w, r.hasW = w, true
				wTok = tok
				i = nx
			case fTS:
				c := line[i]
				switch {
				case c == '"':
					s, e, scr, nx, f := d.str(i, &d.key, false)
					if !f.ok() {
						return f
					}
					v := line[s:e]
					if scr {
						v = d.key[s:e]
					}
					ms, ok := parseRFC3339Milli(v)
					if !ok {
						return fail(ErrBadTime, field, "not an RFC 3339 time "+strconv.Quote(string(v)))
					}
					r.ts = ms
					i = nx
				case c == '{' || c == '[':
					return d.wrongType(i, field, ErrBadTime, "must be an RFC 3339 string or a number")
				default:
					tok, nx := bareToken(line, i)
					if isLiteral(tok) {
						return fail(ErrBadTime, field, "must be an RFC 3339 string or a number, got "+literalType(tok))
					}
					if len(tok) == 0 {
						return d.unexpected(i, "expected a value")
					}
					if !isJSONNumber(tok) {
						return fail(ErrBadTime, field, "not a number "+strconv.Quote(string(tok)))
					}
					ms, ok := parseInt(tok) // digits only: rejects fractions and exponents
					if !ok {
						if bytes.ContainsAny(tok, ".eE") {
							return fail(ErrBadTime, field, "not an integer number of milliseconds "+strconv.Quote(string(tok)))
						}
						return fail(ErrBadTime, field, "out of range "+strconv.Quote(string(tok)))
					}
					r.ts = ms
					i = nx
				}
				r.hasTS = true
			}
			i = skipWS(line, i)
			if i == len(line) {
				return fail(ErrSyntax, "", "unexpected end of line")
			}
			if line[i] == ',' {
				i = skipWS(line, i+1)
				continue
			}
			if line[i] == '}' {
				i++
				break
			}
			return d.unexpected(i, "expected ',' or '}'")
		}
	}
	if i = skipWS(line, i); i != len(line) {
		if isControl(line[i]) && line[i] != 0x7f {
			return fail(ErrBadEncoding, "", fmt.Sprintf("control character 0x%02x at column %d", line[i], i+1))
		}
		return fail(ErrSyntax, "", fmt.Sprintf("trailing data after '}' at column %d", i+1))
	}

	// Semantic checks, once every field is known (op may come last).
	if seen&fSrc == 0 {
		return fail(ErrMissingField, "src", "missing")
	}
	if r.op == OpNodeRemove {
		if seen&fDst != 0 {
			return fail(ErrUnknownField, "dst", "not allowed for node-remove")
		}
		if r.hasW {
			return fail(ErrBadWeight, "w", "not allowed for node-remove")
		}
	} else if seen&fDst == 0 {
		return fail(ErrMissingField, "dst", "missing")
	}
	if r.op == OpSet {
		if !r.hasW {
			return fail(ErrMissingField, "w", "required for set")
		}
		if r.w < 0 {
			return fail(ErrBadWeight, "w", "must be >= 0, got "+string(wTok))
		}
		if r.w == 0 {
			r.w = 0 // -0 becomes +0
		}
	} else if r.hasW && r.w <= 0 {
		return fail(ErrBadWeight, "w", "must be > 0, got "+string(wTok))
	}
	if srcScr {
		r.src = d.scratch[srcS:srcE]
	} else {
		r.src = line[srcS:srcE]
	}
	if seen&fDst != 0 {
		if dstScr {
			r.dst = d.scratch[dstS:dstE]
		} else {
			r.dst = line[dstS:dstE]
		}
	}
	return failure{}
}

// unexpected reports the byte at i where something else was expected. A
// control byte is reported as binary data rather than as a syntax error.
func (d *jsonDecoder) unexpected(i int, want string) failure {
	c := d.line[i]
	if isControl(c) && c != 0x7f {
		return fail(ErrBadEncoding, "", fmt.Sprintf("control character 0x%02x at column %d", c, i+1))
	}
	r, _ := utf8.DecodeRune(d.line[i:])
	return fail(ErrSyntax, "", fmt.Sprintf("%s at column %d, found %q", want, i+1, r))
}

// wrongType reports a value of the wrong JSON type at i for field.
func (d *jsonDecoder) wrongType(i int, field string, err error, want string) failure {
	c := d.line[i]
	var got string
	switch {
	case c == '"':
		got = "string"
	case c == '{':
		got = "object"
	case c == '[':
		got = "array"
	default:
		tok, _ := bareToken(d.line, i)
		switch {
		case isLiteral(tok):
			got = literalType(tok)
		case isJSONNumber(tok):
			got = "number"
		case len(tok) == 0:
			return d.unexpected(i, "expected a value")
		default:
			return fail(ErrSyntax, field, fmt.Sprintf("invalid value %q at column %d", tok, i+1))
		}
	}
	return fail(err, field, want+", got "+got)
}

// str parses the JSON string whose opening quote is at i. When the string
// has no escapes it returns its content as line[s:e] (scr false); otherwise
// it unescapes into *buf (appending; scr true, range buf[s:e]). next is the
// index after the closing quote. With keep set, *buf keeps what it held
// (src and dst share d.scratch); otherwise it is reset first.
func (d *jsonDecoder) str(i int, buf *[]byte, keep bool) (s, e int, scr bool, next int, f failure) {
	line := d.line
	j := i + 1
	for j < len(line) {
		c := line[j]
		if c == '"' {
			return i + 1, j, false, j + 1, failure{}
		}
		if c == '\\' {
			break
		}
		if c < 0x20 {
			return 0, 0, false, 0, fail(ErrBadEncoding, "", fmt.Sprintf("control character 0x%02x at column %d", c, j+1))
		}
		j++
	}
	if j == len(line) {
		return 0, 0, false, 0, fail(ErrSyntax, "", fmt.Sprintf("unterminated string starting at column %d", i+1))
	}
	// Slow path: escapes. line is valid UTF-8, so copying bytes keeps it so.
	b := *buf
	if !keep {
		b = b[:0]
	}
	s = len(b)
	b = append(b, line[i+1:j]...)
	for j < len(line) {
		c := line[j]
		switch {
		case c == '"':
			*buf = b
			return s, len(b), true, j + 1, failure{}
		case c < 0x20:
			*buf = b
			return 0, 0, false, 0, fail(ErrBadEncoding, "", fmt.Sprintf("control character 0x%02x at column %d", c, j+1))
		case c != '\\':
			b = append(b, c)
			j++
			continue
		}
		if j+1 == len(line) {
			break
		}
		esc := line[j+1]
		switch esc {
		case '"', '\\', '/':
			b = append(b, esc)
		case 'b':
			b = append(b, '\b')
		case 'f':
			b = append(b, '\f')
		case 'n':
			b = append(b, '\n')
		case 'r':
			b = append(b, '\r')
		case 't':
			b = append(b, '\t')
		case 'u':
			r, ok := hex4(line, j+2)
			if !ok {
				*buf = b
				return 0, 0, false, 0, fail(ErrSyntax, "", fmt.Sprintf(`invalid \u escape at column %d`, j+1))
			}
			switch {
			case 0xD800 <= r && r < 0xDC00:
				// A high surrogate must be followed by \u and a low one.
				r2, ok := rune(0), false
				if j+7 < len(line) && line[j+6] == '\\' && line[j+7] == 'u' {
					r2, ok = hex4(line, j+8)
				}
				if !ok || r2 < 0xDC00 || r2 > 0xDFFF {
					*buf = b
					return 0, 0, false, 0, fail(ErrBadEncoding, "", fmt.Sprintf(`lone surrogate \u%04x at column %d`, r, j+1))
				}
				b = utf8.AppendRune(b, 0x10000+(r-0xD800)<<10+(r2-0xDC00))
				j += 12
				continue
			case 0xDC00 <= r && r <= 0xDFFF:
				*buf = b
				return 0, 0, false, 0, fail(ErrBadEncoding, "", fmt.Sprintf(`lone surrogate \u%04x at column %d`, r, j+1))
			}
			b = utf8.AppendRune(b, r)
			j += 6
			continue
		default:
			*buf = b
			r, _ := utf8.DecodeRune(line[j+1:])
			return 0, 0, false, 0, fail(ErrSyntax, "", fmt.Sprintf(`invalid escape "\%c" at column %d`, r, j+1))
		}
		j += 2
	}
	*buf = b
	return 0, 0, false, 0, fail(ErrSyntax, "", fmt.Sprintf("unterminated string starting at column %d", i+1))
}

// hex4 reads four hex digits at line[i:].
func hex4(line []byte, i int) (rune, bool) {
	if i+4 > len(line) {
		return 0, false
	}
	var r rune
	for _, c := range line[i : i+4] {
		switch {
		case '0' <= c && c <= '9':
			r = r<<4 | rune(c-'0')
		case 'a' <= c && c <= 'f':
			r = r<<4 | rune(c-'a'+10)
		case 'A' <= c && c <= 'F':
			r = r<<4 | rune(c-'A'+10)
		default:
			return 0, false
		}
	}
	return r, true
}

// skipWS skips JSON whitespace (space, tab, CR, LF) from i.
func skipWS(line []byte, i int) int {
	for i < len(line) {
		switch line[i] {
		case ' ', '\t', '\r', '\n':
			i++
		default:
			return i
		}
	}
	return i
}

// bareToken returns the unquoted value starting at i: the bytes up to the
// next ',', '}', ']', whitespace or control byte.
func bareToken(line []byte, i int) ([]byte, int) {
	j := i
	for j < len(line) {
		c := line[j]
		if c == ',' || c == '}' || c == ']' || c == ' ' || c < 0x20 {
			break
		}
		j++
	}
	return line[i:j], j
}

func isLiteral(tok []byte) bool {
	switch string(tok) {
	case "true", "false", "null":
		return true
	}
	return false
}

func literalType(tok []byte) string {
	if string(tok) == "null" {
		return "null"
	}
	return "boolean"
}

// isJSONNumber reports whether tok is a number in the JSON grammar
// (RFC 8259 section 6): -?(0|[1-9][0-9]*)(\.[0-9]+)?([eE][+-]?[0-9]+)?
func isJSONNumber(tok []byte) bool {
	i := 0
	if i < len(tok) && tok[i] == '-' {
		i++
	}
	if i == len(tok) {
		return false
	}
	if tok[i] == '0' {
		i++
	} else if '1' <= tok[i] && tok[i] <= '9' {
		for i < len(tok) && isDigit(tok[i]) {
			i++
		}
	} else {
		return false
	}
	if i < len(tok) && tok[i] == '.' {
		i++
		if i == len(tok) || !isDigit(tok[i]) {
			return false
		}
		for i < len(tok) && isDigit(tok[i]) {
			i++
		}
	}
	if i < len(tok) && (tok[i] == 'e' || tok[i] == 'E') {
		i++
		if i < len(tok) && (tok[i] == '+' || tok[i] == '-') {
			i++
		}
		if i == len(tok) || !isDigit(tok[i]) {
			return false
		}
		for i < len(tok) && isDigit(tok[i]) {
			i++
		}
	}
	return i == len(tok)
}

// badUTF8 reports the first invalid UTF-8 byte of line.
func badUTF8(line []byte) failure {
	i := 0
	for i < len(line) {
		r, n := utf8.DecodeRune(line[i:])
		if r == utf8.RuneError && n <= 1 {
			break
		}
		i += n
	}
	return fail(ErrBadEncoding, "", fmt.Sprintf("invalid UTF-8 at column %d", i+1))
}
