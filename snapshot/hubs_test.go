package snapshot

import (
	"bytes"
	"encoding/binary"
	"encoding/json"
	"math"
	"reflect"
	"strings"
	"testing"

	"github.com/cockroachdb/pebble/v2"

	"shoal/tracker"
)

// hubSnapshot is a small snapshot whose communities list hubs (as the
// timeline fills them in), one without.
func hubSnapshot(t *testing.T) *Snapshot {
	t.Helper()
	s, err := Freeze(Header{ID: 3, Graph: "hubs"}, []uint64{1, 1, tracker.NoCommunity, 2, 2, 9},
		[]tracker.CommunityStats{{ID: 1, Size: 2, Internal: 1, Degree: 3}, {ID: 2, Size: 2, Internal: 1, Degree: 3}, {ID: 9, Size: 1}})
	if err != nil {
		t.Fatal(err)
	}
	s.Communities[0].Hubs = []uint32{2}
	s.Communities[1].Hubs = []uint32{2, 1 << 31, math.MaxUint32}
	return s
}

// TestHubsStored: hubs survive Write and Load (the layout of doc.go, Value
// encodings); a community record in the layout written before hubs
// existed, built here byte by byte from doc.go, still loads, as a
// community without hubs; a damaged hub list is corruption; Write refuses
// hubs out of order.
func TestHubsStored(t *testing.T) {
	db := openDB(t)
	s := hubSnapshot(t)
	commit(t, db, func(b *pebble.Batch) {
		if err := Write(b, s); err != nil {
			t.Fatal(err)
		}
	})
	got, err := Load(db, 3)
	if err != nil || !reflect.DeepEqual(got, s) {
		t.Fatalf("read back: %+v, %v; want %+v", got, err, s)
	}
	if got.Communities[2].Hubs != nil {
		t.Fatalf("a community without hubs read back with %v", got.Communities[2].Hubs)
	}

	// The old layout: version | id | size | 4 floats | first member |
	// gaps | crc, for community 1 of s.
	c := s.Communities[0]
	old := []byte{FormatVersion}
	old = binary.AppendUvarint(old, c.ID)
	old = binary.AppendUvarint(old, uint64(c.Size))
	for _, f := range []float64{c.Internal, c.Degree, c.Density, c.Conductance} {
		old = binary.BigEndian.AppendUint64(old, math.Float64bits(f))
	}
	old = binary.AppendUvarint(old, uint64(c.Members[0]))
	old = binary.AppendUvarint(old, uint64(c.Members[1]-c.Members[0]))
	old = binary.BigEndian.AppendUint32(old, crcOf(old))
	commit(t, db, func(b *pebble.Batch) { b.Set(appendCommunityKey(nil, 3, c.ID), old, nil) })
	got, err = Load(db, 3)
	if err != nil {
		t.Fatalf("a record of the old layout: %v", err)
	}
	if want := c; got.Communities[0].Hubs != nil || !reflect.DeepEqual(got.Communities[0].Members, want.Members) || got.Communities[0].Internal != want.Internal {
		t.Fatalf("old record read as %+v", got.Communities[0])
	}

	body := old[:len(old)-crcLen]
	for name, tail := range map[string][]byte{
		"zero hubs":           {0},
		"count over bytes":    {5, 1},
		"hubs not increasing": {2, 7, 0},
		"hub over uint32":     binary.AppendUvarint([]byte{1}, 1<<32),
	} {
		v := append(bytes.Clone(body), tail...)
		v = binary.BigEndian.AppendUint32(v, crcOf(v))
		commit(t, db, func(b *pebble.Batch) { b.Set(appendCommunityKey(nil, 3, c.ID), v, nil) })
		if _, err := Load(db, 3); !IsCorrupt(err) {
			t.Errorf("%s: %v, want a corruption error", name, err)
		}
	}

	bad := hubSnapshot(t)
	bad.Communities[1].Hubs = []uint32{4, 4}
	if err := Write(db.NewBatch(), bad); err == nil || !strings.Contains(err.Error(), "hubs not increasing") {
		t.Fatalf("Write with repeated hubs: %v", err)
	}
}

// TestHubsExported: the JSON-lines export names each community's hubs
// with the name function, and leaves the field out for a community
// without hubs (so exports of snapshots without a policy do not change).
func TestHubsExported(t *testing.T) {
	var buf bytes.Buffer
	if err := WriteJSONL(&buf, hubSnapshot(t), func(v uint32) string { return "n" + string(rune('a'+v%26)) }); err != nil {
		t.Fatal(err)
	}
	lines := strings.Split(strings.TrimSpace(buf.String()), "\n")
	if len(lines) != 4 {
		t.Fatalf("%d lines, want a header and 3 communities", len(lines))
	}
	var c1 struct {
		Hubs []string `json:"hubs"`
	}
	if err := json.Unmarshal([]byte(lines[1]), &c1); err != nil || !reflect.DeepEqual(c1.Hubs, []string{"nc"}) {
		t.Fatalf("community 1: hubs %v, %v; want [nc] (node 2)", c1.Hubs, err)
	}
	if strings.Contains(lines[3], `"hubs"`) {
		t.Fatalf("a community without hubs has the field: %s", lines[3])
	}
}
