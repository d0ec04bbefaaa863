package snapshot

import (
	"bytes"
	"encoding/binary"
	"errors"
	"math"
	"math/rand/v2"
	"reflect"
	"testing"

	"github.com/cockroachdb/pebble/v2"

	"shoal/tracker"
)

func openDB(t testing.TB) *pebble.DB {
	t.Helper()
	db, err := pebble.Open(t.TempDir(), &pebble.Options{Logger: quietLogger{}})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() {
		if err := db.Close(); err != nil {
			t.Error(err)
		}
	})
	return db
}

type quietLogger struct{}

func (quietLogger) Infof(string, ...any)  {}
func (quietLogger) Errorf(string, ...any) {}
func (quietLogger) Fatalf(format string, args ...any) {
	panic("pebble fatal: " + format)
}

func commit(t testing.TB, db *pebble.DB, fn func(b *pebble.Batch)) {
	t.Helper()
	b := db.NewBatch()
	fn(b)
	if err := b.Commit(pebble.Sync); err != nil {
		t.Fatal(err)
	}
}

// randomSnapshot builds a random snapshot through Freeze: n nodes, some
// absent, community ids spread over the whole uint64 range, arbitrary finite
// statistics.
func randomSnapshot(t testing.TB, r *rand.Rand, id uint64, n int) *Snapshot {
	t.Helper()
	k := 1 + r.IntN(n/3+1)
	ids := make([]uint64, k)
	for i := range ids {
		switch r.IntN(3) {
		case 0:
			ids[i] = uint64(i)
		case 1:
			ids[i] = r.Uint64() >> r.IntN(64)
		default:
			ids[i] = math.MaxUint64 - 1 - uint64(i)
		}
	}
	membership := make([]uint64, n)
	size := map[uint64]int{}
	for v := range membership {
		if r.IntN(10) == 0 {
			membership[v] = tracker.NoCommunity
			continue
		}
		membership[v] = ids[r.IntN(k)]
		size[membership[v]]++
	}
	var stats []tracker.CommunityStats
	seen := map[uint64]bool{}
	for _, c := range ids {
		if seen[c] {
			continue
		}
		seen[c] = true
		stats = append(stats, tracker.CommunityStats{ID: c, Size: size[c], Internal: r.Float64() * 100, Degree: r.Float64()*300 + 1})
	}
	graph := []string{"", "payments", "graph with spaces \u00e9\u4e16", string(bytes.Repeat([]byte{'x'}, 300))}[r.IntN(4)]
	h := Header{ID: id, Graph: graph, Seq: r.Uint64(), Watermark: r.Int64() - math.MaxInt64/2, Time: -r.Int64N(1 << 50),
		Modularity: r.Float64() - 0.5, Gamma: r.Float64() * 3, Edges: r.IntN(1 << 30)}
	if r.IntN(2) == 0 {
		h.Objective, h.Quality = tracker.ObjectiveCPM, r.Float64()*1000-10
	}
	s, err := Freeze(h, membership, stats)
	if err != nil {
		t.Fatal(err)
	}
	return s
}

// TestRoundTrip: random snapshots written to a real Pebble and read back are
// identical (property test over 200 random snapshots, ids including 0 and
// the largest uint64).
func TestRoundTrip(t *testing.T) {
	db := openDB(t)
	r := rand.New(rand.NewPCG(1, 2))
	var want []*Snapshot
	ids := []uint64{0, math.MaxUint64}
	for len(ids) < 200 {
		ids = append(ids, r.Uint64N(1<<40))
	}
	seen := map[uint64]bool{}
	for _, id := range ids {
		if seen[id] {
			continue
		}
		seen[id] = true
		s := randomSnapshot(t, r, id, 1+r.IntN(300))
		commit(t, db, func(b *pebble.Batch) {
			if err := Write(b, s); err != nil {
				t.Fatal(err)
			}
		})
		want = append(want, s)
	}
	for _, s := range want {
		got, err := Load(db, s.ID)
		if err != nil {
			t.Fatal(err)
		}
		if !reflect.DeepEqual(got, s) {
			t.Fatalf("snapshot %d: read back differs:\n got %+v\nwant %+v", s.ID, got.Header, s.Header)
		}
	}
	hs, err := List(db)
	if err != nil {
		t.Fatal(err)
	}
	if len(hs) != len(want) {
		t.Fatalf("List: %d headers, want %d", len(hs), len(want))
	}
	for i := range hs {
		if i > 0 && hs[i].ID <= hs[i-1].ID {
			t.Fatalf("List not in id order at %d", i)
		}
	}
	latest, err := Latest(db)
	if err != nil || latest.ID != math.MaxUint64 {
		t.Fatalf("Latest: %v, %v; want id MaxUint64", latest, err)
	}
}

// TestRewrite: writing a snapshot id again with fewer communities leaves no
// stale records (Write starts with a range delete).
func TestRewrite(t *testing.T) {
	db := openDB(t)
	r := rand.New(rand.NewPCG(3, 4))
	big := randomSnapshot(t, r, 7, 500)
	small, err := Freeze(Header{ID: 7}, []uint64{1, 1, 2}, []tracker.CommunityStats{{ID: 1, Size: 2}, {ID: 2, Size: 1}})
	if err != nil {
		t.Fatal(err)
	}
	for _, s := range []*Snapshot{big, small} {
		commit(t, db, func(b *pebble.Batch) {
			if err := Write(b, s); err != nil {
				t.Fatal(err)
			}
		})
	}
	got, err := Load(db, 7)
	if err != nil || !reflect.DeepEqual(got, small) {
		t.Fatalf("after rewrite: %+v, %v; want the small snapshot", got, err)
	}
}

func TestWriteRejectsInconsistent(t *testing.T) {
	db := openDB(t)
	s, err := Freeze(Header{ID: 1}, []uint64{1, 1, 2}, []tracker.CommunityStats{{ID: 1, Size: 2}, {ID: 2, Size: 1}})
	if err != nil {
		t.Fatal(err)
	}
	bad := *s
	bad.Communities = []Community{s.Communities[1], s.Communities[0]}
	b := db.NewBatch()
	defer b.Close()
	if err := Write(b, &bad); !errors.Is(err, ErrInvalid) {
		t.Errorf("unsorted communities: err = %v, want ErrInvalid", err)
	}
	bad = *s
	bad.Nodes = 5
	if err := Write(b, &bad); !errors.Is(err, ErrInvalid) {
		t.Errorf("wrong node count: err = %v, want ErrInvalid", err)
	}
}

// TestRetain: 10 snapshots, keep 3 -> exactly ids 8, 9, 10 remain and the
// others are ErrNotFound; a second Retain deletes nothing.
func TestRetain(t *testing.T) {
	db := openDB(t)
	r := rand.New(rand.NewPCG(5, 6))
	for id := uint64(1); id <= 10; id++ {
		s := randomSnapshot(t, r, id, 50)
		commit(t, db, func(b *pebble.Batch) {
			if err := Write(b, s); err != nil {
				t.Fatal(err)
			}
		})
	}
	var deleted int
	commit(t, db, func(b *pebble.Batch) {
		var err error
		if deleted, err = Retain(b, db, 3); err != nil {
			t.Fatal(err)
		}
	})
	if deleted != 7 {
		t.Errorf("deleted %d, want 7", deleted)
	}
	hs, err := List(db)
	if err != nil {
		t.Fatal(err)
	}
	var ids []uint64
	for _, h := range hs {
		ids = append(ids, h.ID)
	}
	if !reflect.DeepEqual(ids, []uint64{8, 9, 10}) {
		t.Errorf("after Retain(3): ids %v, want [8 9 10]", ids)
	}
	for id := uint64(1); id <= 10; id++ {
		_, err := Load(db, id)
		if id <= 7 && !errors.Is(err, ErrNotFound) {
			t.Errorf("Load(%d) after retention: %v, want ErrNotFound", id, err)
		}
		if id > 7 && err != nil {
			t.Errorf("Load(%d): %v", id, err)
		}
	}
	// No community record of a deleted snapshot is left.
	it, _ := db.NewIter(&pebble.IterOptions{LowerBound: []byte{Prefix}, UpperBound: appendSnapshotStart(nil, 8)})
	if it.First() {
		t.Errorf("key %x of a deleted snapshot remains", it.Key())
	}
	it.Close()
	commit(t, db, func(b *pebble.Batch) {
		if n, err := Retain(b, db, 3); n != 0 || err != nil {
			t.Errorf("second Retain: %d, %v; want 0, nil", n, err)
		}
	})
	if _, err := Retain(db.NewBatch(), db, 0); !errors.Is(err, ErrInvalid) {
		t.Errorf("Retain(0): %v, want ErrInvalid", err)
	}
}

func TestNotFound(t *testing.T) {
	db := openDB(t)
	if _, err := Load(db, 42); !errors.Is(err, ErrNotFound) || IsCorrupt(err) {
		t.Errorf("Load of a missing id: %v, want ErrNotFound", err)
	}
	if _, err := Latest(db); !errors.Is(err, ErrNotFound) {
		t.Errorf("Latest of an empty store: %v, want ErrNotFound", err)
	}
	if hs, err := List(db); len(hs) != 0 || err != nil {
		t.Errorf("List of an empty store: %v, %v", hs, err)
	}
}

// TestCorrupt damages stored bytes in several ways; every Load must fail with
// IsCorrupt (and not with ErrNotFound).
func TestCorrupt(t *testing.T) {
	r := rand.New(rand.NewPCG(7, 8))
	s := randomSnapshot(t, r, 5, 200)
	hk := headerKey(5)
	ck := appendCommunityKey(nil, 5, s.Communities[0].ID)
	reencode := func(v []byte) []byte { // fix the checksum after an edit
		n := len(v) - crcLen
		return binary.BigEndian.AppendUint32(v[:n:n], crcOf(v[:n]))
	}
	for _, tc := range []struct {
		name   string
		damage func(b *pebble.Batch, hv, cv []byte)
	}{
		{"truncated header", func(b *pebble.Batch, hv, _ []byte) { b.Set(hk, hv[:len(hv)/2], nil) }},
		{"empty header", func(b *pebble.Batch, _, _ []byte) { b.Set(hk, nil, nil) }},
		{"header bad version", func(b *pebble.Batch, hv, _ []byte) {
			v := bytes.Clone(hv)
			v[0] = 2
			b.Set(hk, reencode(v), nil)
		}},
		{"header bit flip", func(b *pebble.Batch, hv, _ []byte) {
			v := bytes.Clone(hv)
			v[3] ^= 0x10
			b.Set(hk, v, nil)
		}},
		{"truncated community", func(b *pebble.Batch, _, cv []byte) { b.Set(ck, cv[:len(cv)-1], nil) }},
		{"community bad version", func(b *pebble.Batch, _, cv []byte) {
			v := bytes.Clone(cv)
			v[0] = 0
			b.Set(ck, reencode(v), nil)
		}},
		{"community trailing bytes", func(b *pebble.Batch, _, cv []byte) {
			v := append(bytes.Clone(cv[:len(cv)-crcLen]), 1, 0, 0, 0, 0)
			b.Set(ck, reencode(v), nil)
		}},
		{"community record missing", func(b *pebble.Batch, _, _ []byte) { b.Delete(ck, nil) }},
		{"extra community record", func(b *pebble.Batch, _, cv []byte) {
			b.Set(appendCommunityKey(nil, 5, s.Communities[0].ID+1<<20), cv, nil)
		}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			db := openDB(t)
			commit(t, db, func(b *pebble.Batch) {
				if err := Write(b, s); err != nil {
					t.Fatal(err)
				}
			})
			hv := encodeHeader(nil, &s.Header)
			cv := encodeCommunity(nil, &s.Communities[0])
			commit(t, db, func(b *pebble.Batch) { tc.damage(b, hv, cv) })
			_, err := Load(db, 5)
			if !IsCorrupt(err) || errors.Is(err, ErrNotFound) {
				t.Errorf("Load: %v, want a corruption error", err)
			}
			if _, err := Latest(db); !IsCorrupt(err) {
				t.Errorf("Latest: %v, want a corruption error", err)
			}
		})
	}
	// A community record without its header: Latest and List report corruption.
	db := openDB(t)
	commit(t, db, func(b *pebble.Batch) {
		b.Set(ck, encodeCommunity(nil, &s.Communities[0]), nil)
	})
	if _, err := Latest(db); !IsCorrupt(err) {
		t.Errorf("Latest with an orphan record: %v, want corruption", err)
	}
	if _, err := List(db); !IsCorrupt(err) {
		t.Errorf("List with an orphan record: %v, want corruption", err)
	}
	// Retain still removes it: it reads keys only.
	commit(t, db, func(b *pebble.Batch) {
		s2 := randomSnapshot(t, r, 6, 20)
		if err := Write(b, s2); err != nil {
			t.Fatal(err)
		}
	})
	commit(t, db, func(b *pebble.Batch) {
		if n, err := Retain(b, db, 1); n != 1 || err != nil {
			t.Errorf("Retain over a corrupt snapshot: %d, %v; want 1, nil", n, err)
		}
	})
	if _, err := List(db); err != nil {
		t.Errorf("List after retention: %v", err)
	}
}

// FuzzDecode: the value decoders never panic, whatever the bytes; each input
// is tried as is (mostly failing the checksum) and with a valid version byte
// and checksum wrapped around it, so that the field parsers see it too. A
// value that decodes must encode back to the same bytes.
func FuzzDecode(f *testing.F) {
	r := rand.New(rand.NewPCG(9, 10))
	s := randomSnapshot(f, r, 11, 40)
	f.Add(encodeHeader(nil, &s.Header))
	for i := range s.Communities {
		f.Add(encodeCommunity(nil, &s.Communities[i]))
	}
	f.Add([]byte{})
	f.Add([]byte{1, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0x01})
	f.Fuzz(func(t *testing.T, data []byte) {
		wrapped := append([]byte{FormatVersion}, data...)
		wrapped = binary.BigEndian.AppendUint32(wrapped, crcOf(wrapped))
		for _, v := range [][]byte{data, wrapped} {
			if h, err := decodeHeader(v); err == nil {
				if !bytes.Equal(encodeHeader(nil, &h), v) {
					t.Errorf("header %x decodes but does not re-encode to the same bytes", v)
				}
			} else if !IsCorrupt(err) {
				t.Errorf("header decode error %v is not a corruption error", err)
			}
			c, slab, err := decodeCommunity(v, nil)
			if err == nil {
				c.Members = slab
				if !bytes.Equal(encodeCommunity(nil, &c), v) {
					t.Errorf("community %x decodes but does not re-encode to the same bytes", v)
				}
			} else if !IsCorrupt(err) {
				t.Errorf("community decode error %v is not a corruption error", err)
			}
		}
	})
}
