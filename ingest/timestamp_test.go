package ingest

import (
	"math/rand/v2"
	"testing"
	"time"
)

// TestRFC3339AgainstStdlib compares our allocation-free parser with the
// standard library (time.Parse, time.Time.UnixMilli) on random instants
// over years 0000..9999, with random fractions and offsets.
func TestRFC3339AgainstStdlib(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	lo := time.Date(0, 1, 1, 0, 0, 0, 0, time.UTC).Unix()
	hi := time.Date(9999, 12, 31, 23, 59, 59, 0, time.UTC).Unix()
	layouts := []string{time.RFC3339, time.RFC3339Nano, "2006-01-02T15:04:05.000Z07:00", "2006-01-02T15:04:05.0Z07:00"}
	for i := range 20000 {
		sec := lo + rng.Int64N(hi-lo)
		tm := time.Unix(sec, rng.Int64N(1e9)).UTC()
		if i%2 == 0 {
			off := (rng.IntN(47) - 23) * 3600
			off += rng.IntN(60) * 60
			tm = tm.In(time.FixedZone("", off))
		}
		s := tm.Format(layouts[i%len(layouts)])
		ref, err := time.Parse(time.RFC3339Nano, s)
		if err != nil || ref.Year() < 0 || ref.Year() > 9999 {
			continue // the offset moved it out of 0000..9999 in the local form
		}
		got, ok := parseRFC3339Milli([]byte(s))
		if !ok || got != ref.UnixMilli() {
			t.Fatalf("%s: got %d %v, want %d", s, got, ok, ref.UnixMilli())
		}
	}
}

func TestRFC3339Rejects(t *testing.T) {
	// Each is outside RFC 3339 section 5.6 or outside the range that the
	// standard library's strict fast path accepts.
	for _, s := range []string{
		"", "2026-11-30", "2026-11-30T08:15:02", "2026-11-30 08:15:02Z", "2026-11-30t08:15:02Z",
		"2026-11-30T08:15:02z", "2026-13-01T00:00:00Z", "2026-00-01T00:00:00Z", "2026-02-29T00:00:00Z",
		"2100-02-29T00:00:00Z", "1900-02-29T00:00:00Z", "2026-04-31T00:00:00Z", "2026-11-30T24:00:00Z", "2026-11-30T23:60:00Z",
		"2016-12-31T23:59:60Z", "2026-11-30T08:15:02+24:00", "2026-11-30T08:15:02+01:60", "2026-11-30T08:15:02+0100",
		"2026-11-30T08:15:02.Z", "2026-11-30T08:15:02,5Z", "+2026-11-30T08:15:02Z", "２０２６-11-30T08:15:02Z",
		"2026-11-30T08:15:02Z ", "-026-11-30T08:15:02Z",
	} {
		if ms, ok := parseRFC3339Milli([]byte(s)); ok {
			t.Errorf("%q accepted as %d", s, ms)
		}
	}
	// Leap days that exist (Gregorian rule: 2000 is leap, 1900 is not).
	for _, s := range []string{"2000-02-29T00:00:00Z", "2024-02-29T12:00:00Z", "0000-02-29T00:00:00Z"} {
		got, ok := parseRFC3339Milli([]byte(s))
		if want := ms(t, s); !ok || got != want {
			t.Errorf("%s: %d %v, want %d", s, got, ok, want)
		}
	}
}
