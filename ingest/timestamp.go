package ingest

import "math"

// parseRFC3339Milli parses an RFC 3339 date-time
// ("2006-01-02T15:04:05[.fraction](Z|+07:00)") into Unix milliseconds,
// without allocating. It accepts exactly what the standard library's strict
// RFC 3339 fast path accepts (time.Parse with time.RFC3339 on well-formed
// input): upper-case T and Z, years 0000-9999, seconds 00-59 (no leap
// second), offsets up to ±23:59. Fractions below a millisecond are
// truncated towards the past, as time.Time.UnixMilli does.
func parseRFC3339Milli(s []byte) (int64, bool) {
	if len(s) < len("2006-01-02T15:04:05Z") {
		return 0, false
	}
	if s[4] != '-' || s[7] != '-' || s[10] != 'T' || s[13] != ':' || s[16] != ':' {
		return 0, false
	}
	year, ok1 := digits(s[0:4])
	month, ok2 := digits(s[5:7])
	day, ok3 := digits(s[8:10])
	hour, ok4 := digits(s[11:13])
	minute, ok5 := digits(s[14:16])
	sec, ok6 := digits(s[17:19])
	if !(ok1 && ok2 && ok3 && ok4 && ok5 && ok6) {
		return 0, false
	}
	if month < 1 || month > 12 || day < 1 || day > daysIn(month, year) ||
		hour > 23 || minute > 59 || sec > 59 {
		return 0, false
	}
	rest := s[19:]
	var ms int64
	if len(rest) >= 2 && rest[0] == '.' && isDigit(rest[1]) {
		n := 1
		for n < len(rest) && isDigit(rest[n]) {
			if n <= 3 {
				ms = ms*10 + int64(rest[n]-'0')
			}
			n++
		}
		for k := n; k <= 3; k++ { // ".5" is 500 ms
			ms *= 10
		}
		rest = rest[n:]
	}
	var offset int64
	switch {
	case len(rest) == 1 && rest[0] == 'Z':
	case len(rest) == 6 && (rest[0] == '+' || rest[0] == '-') && rest[3] == ':':
		oh, okh := digits(rest[1:3])
		om, okm := digits(rest[4:6])
		if !okh || !okm || oh > 23 || om > 59 {
			return 0, false
		}
		offset = int64(oh*60+om) * 60
		if rest[0] == '-' {
			offset = -offset
		}
	default:
		return 0, false
	}
	days := daysFromCivil(int64(year), int64(month), int64(day))
	unix := days*86400 + int64(hour)*3600 + int64(minute)*60 + int64(sec) - offset
	return unix*1000 + ms, true
}

func isDigit(c byte) bool { return '0' <= c && c <= '9' }

func digits(b []byte) (int, bool) {
	x := 0
	for _, c := range b {
		if !isDigit(c) {
			return 0, false
		}
		x = x*10 + int(c-'0')
	}
	return x, true
}

func daysIn(month, year int) int {
	switch month {
	case 2:
		if year%4 == 0 && (year%100 != 0 || year%400 == 0) {
			return 29
		}
		return 28
	case 4, 6, 9, 11:
		return 30
	}
	return 31
}

// daysFromCivil returns the number of days from 1970-01-01 to y-m-d in the
// proleptic Gregorian calendar (H. Hinnant, "chrono-Compatible Low-Level
// Date Algorithms", days_from_civil).
func daysFromCivil(y, m, d int64) int64 {
	if m <= 2 {
		y--
	}
	era := y / 400
	if y < 0 && y%400 != 0 {
		era--
	}
	yoe := y - era*400
	mp := (m + 9) % 12
	doy := (153*mp+2)/5 + d - 1
	doe := yoe*365 + yoe/4 - yoe/100 + doy
	return era*146097 + doe - 719468
}

// parseInt parses an optionally negative decimal integer made of digits
// only (no '+', no '_', no spaces). It reports false on any other byte or
// on int64 overflow.
func parseInt(b []byte) (int64, bool) {
	neg := false
	if len(b) > 0 && b[0] == '-' {
		neg = true
		b = b[1:]
	}
	if len(b) == 0 || len(b) > 19 {
		return 0, false
	}
	var x uint64
	for _, c := range b {
		if !isDigit(c) {
			return 0, false
		}
		x = x*10 + uint64(c-'0')
	}
	if neg {
		if x > 1<<63 {
			return 0, false
		}
		return -int64(x), true
	}
	if x > math.MaxInt64 {
		return 0, false
	}
	return int64(x), true
}
