package ingest

import (
	"bytes"
	"crypto/sha256"
	"errors"
	"io/fs"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/cockroachdb/pebble/v2"
)

func newStore(t testing.TB, dir string, o *StoreOptions) *Store {
	t.Helper()
	s, err := OpenStore(dir, o)
	if err != nil {
		t.Fatal(err)
	}
	return s
}

// TestStoreRoundTrip: nodes, presence, edges and the state written in one
// batch come back from Restore after a reopen, and the restored graph has
// exactly the edges and the absent node removed.
func TestStoreRoundTrip(t *testing.T) {
	dir := t.TempDir()
	s := newStore(t, dir, &StoreOptions{Graph: "g", Create: true})
	b := s.NewBatch()
	names := []string{"alice", "bob", "carol", "dave"}
	for i, n := range names {
		if err := b.PutNode(uint32(i), n, i != 3); err != nil {
			t.Fatal(err)
		}
	}
	edges := [][3]float64{{0, 1, 1}, {1, 2, 0.1 + 0.2}, {2, 2, 5}, {0, 2, 1e-300}}
	for _, e := range edges {
		if err := b.PutEdge(uint32(e[0]), uint32(e[1]), e[2]); err != nil {
			t.Fatal(err)
		}
	}
	if err := b.PutEdge(0, 2, 0); err != nil { // deleted again in the same batch
		t.Fatal(err)
	}
	st := State{Applied: 17, Watermark: -5, EventsApplied: 40, EventsRejected: 3, Messages: 20, NextCommunity: 9, SnapshotEvents: 30, SnapshotMark: -7}
	if err := b.PutState(&st); err != nil {
		t.Fatal(err)
	}
	if err := s.Commit(b, &st); err != nil {
		t.Fatal(err)
	}
	if err := s.Close(); err != nil {
		t.Fatal(err)
	}
	if err := s.Close(); !errors.Is(err, ErrClosed) {
		t.Fatalf("second Close: %v, want ErrClosed", err)
	}

	s = newStore(t, dir, &StoreOptions{Graph: "g"})
	defer s.Close()
	if s.State() != st {
		t.Fatalf("state %+v, want %+v", s.State(), st)
	}
	r, err := s.Restore()
	if err != nil {
		t.Fatal(err)
	}
	if r.Dict.Len() != 4 || r.Dict.Name(2) != "carol" {
		t.Fatalf("dictionary of %d names", r.Dict.Len())
	}
	if want := []bool{true, true, true, false}; !equalBools(r.Present, want) {
		t.Fatalf("presence %v, want %v", r.Present, want)
	}
	if len(r.Edges) != 3 {
		t.Fatalf("%d edges, want 3: %v", len(r.Edges), r.Edges)
	}
	// Key order: (0,1), (1,2), (2,2); the weight bits survive exactly.
	if r.Edges[1].W != 0.1+0.2 || r.Edges[2].U != 2 || r.Edges[2].V != 2 {
		t.Fatalf("edges %v", r.Edges)
	}
	g := r.Graph()
	if g.Nodes() != 3 || g.Edges() != 3 || g.Weight(1, 2) != 0.1+0.2 || g.Has(3) {
		t.Fatalf("graph: %d nodes, %d edges", g.Nodes(), g.Edges())
	}
	if w := r.Window.Weight(0, 1); w != 1 {
		t.Fatalf("window weight %v, want 1", w)
	}
}

func equalBools(a, b []bool) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i] != b[i] {
			return false
		}
	}
	return true
}

// TestWeightEncoding: every finite positive weight round-trips bit for bit,
// and small integers take 2 bytes (1.0 is 0x3FF0 followed by zero bytes).
func TestWeightEncoding(t *testing.T) {
	if n := len(appendWeight(nil, 1)); n != 2 {
		t.Fatalf("1.0 takes %d bytes, want 2", n)
	}
	rng := rand.New(rand.NewPCG(1, 2))
	ws := []float64{math.SmallestNonzeroFloat64, math.MaxFloat64, 0.1, 3, 1 << 40}
	for range 10000 {
		ws = append(ws, math.Float64frombits(rng.Uint64()>>1))
	}
	for _, w := range ws {
		if w <= 0 || math.IsInf(w, 0) || math.IsNaN(w) {
			continue
		}
		got, err := decodeWeight(appendWeight(nil, w))
		if err != nil || math.Float64bits(got) != math.Float64bits(w) {
			t.Fatalf("%v round-trips to %v (%v)", w, got, err)
		}
	}
	for _, bad := range [][]byte{nil, make([]byte, 9), {0x7f, 0xf8}, {0xbf, 0xf0}} {
		if _, err := decodeWeight(bad); !errors.Is(err, ErrStoreCorrupt) {
			t.Errorf("%x: %v, want ErrStoreCorrupt", bad, err)
		}
	}
}

// dirDigest hashes every file under dir (names and bytes).
func dirDigest(t *testing.T, dir string) [32]byte {
	t.Helper()
	h := sha256.New()
	err := filepath.WalkDir(dir, func(p string, d fs.DirEntry, err error) error {
		if err != nil || d.IsDir() {
			return err
		}
		b, err := os.ReadFile(p)
		if err != nil {
			return err
		}
		h.Write([]byte(p))
		h.Write(b)
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	var out [32]byte
	h.Sum(out[:0])
	return out
}

// TestStoreVersionMismatch: a store written with another format version is
// refused with ErrStoreVersion and a message naming both versions, and not
// one byte of the directory changes.
func TestStoreVersionMismatch(t *testing.T) {
	dir := t.TempDir()
	s := newStore(t, dir, &StoreOptions{Graph: "g", Create: true})
	b := s.NewBatch()
	b.PutNode(0, "a", true)
	b.PutNode(1, "b", true)
	b.PutEdge(0, 1, 2)
	if err := s.Commit(b, nil); err != nil {
		t.Fatal(err)
	}
	s.Close()
	// Forge a future version with Pebble directly.
	db, err := pebble.Open(dir, &pebble.Options{Logger: quietLogger{}, FormatMajorVersion: pebble.FormatNewest})
	if err != nil {
		t.Fatal(err)
	}
	if err := db.Set(metaKey(metaFormat), []byte{99}, pebble.Sync); err != nil {
		t.Fatal(err)
	}
	db.Close()
	before := dirDigest(t, dir)
	for _, o := range []*StoreOptions{{Graph: "g"}, {ReadOnly: true, AnyWindow: true, AnyKey: true}, {Graph: "g", Create: true}} {
		_, err := OpenStore(dir, o)
		if !errors.Is(err, ErrStoreVersion) {
			t.Fatalf("open %+v: %v, want ErrStoreVersion", o, err)
		}
		if msg := err.Error(); !strings.Contains(msg, "version 99") || !strings.Contains(msg, "version 1") {
			t.Fatalf("message does not name both versions: %q", msg)
		}
	}
	if after := dirDigest(t, dir); after != before {
		t.Fatal("refusing the store changed files in it")
	}
}

// TestStoreSettingsMismatch: graph name, window span and key fingerprint
// are checked on open; a missing store is not created unless asked.
func TestStoreSettingsMismatch(t *testing.T) {
	dir := t.TempDir()
	if _, err := OpenStore(filepath.Join(dir, "none"), &StoreOptions{Graph: "g"}); !errors.Is(err, ErrNotStore) {
		t.Fatalf("missing store: %v, want ErrNotStore", err)
	}
	key := []byte("0123456789abcdef")
	s := newStore(t, dir, &StoreOptions{Graph: "g", Window: time.Hour, KeyID: key, Create: true})
	s.Close()
	for _, c := range []struct {
		o    StoreOptions
		want string
	}{
		{StoreOptions{Graph: "h", Window: time.Hour, KeyID: key}, `graph "g"`},
		{StoreOptions{Graph: "g", KeyID: key}, "window 1h0m0s"},
		{StoreOptions{Graph: "g", Window: time.Hour}, "pseudonymised"},
		{StoreOptions{Graph: "g", Window: time.Hour, KeyID: []byte("another key 0000")}, "another key"},
	} {
		_, err := OpenStore(dir, &c.o)
		if !errors.Is(err, ErrStoreMismatch) || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%+v: %v, want ErrStoreMismatch mentioning %q", c.o, err, c.want)
		}
	}
	s = newStore(t, dir, &StoreOptions{Graph: "g", Window: time.Hour, KeyID: key})
	if m := s.Meta(); m.Window != time.Hour || !bytes.Equal(m.KeyID, key) || m.Graph != "g" {
		t.Fatalf("meta %+v", m)
	}
	// A second opener is refused while the first holds the store.
	if _, err := OpenStore(dir, &StoreOptions{ReadOnly: true, AnyWindow: true, AnyKey: true}); !errors.Is(err, ErrStoreLocked) {
		t.Fatalf("second open: %v, want ErrStoreLocked", err)
	}
	s.Close()
}

// TestStoreNotShoal: a Pebble database without our metadata is not a store.
func TestStoreNotShoal(t *testing.T) {
	dir := t.TempDir()
	db, err := pebble.Open(dir, &pebble.Options{Logger: quietLogger{}})
	if err != nil {
		t.Fatal(err)
	}
	db.Set([]byte("hello"), []byte("world"), pebble.Sync)
	db.Close()
	if _, err := OpenStore(dir, &StoreOptions{Graph: "g", Create: true}); !errors.Is(err, ErrNotStore) {
		t.Fatalf("%v, want ErrNotStore", err)
	}
}

// BenchmarkStoreCommit: one synced commit of a batch of 16384 edge writes
// in key order plus the state, the consumer's unit of work.
func BenchmarkStoreCommit(b *testing.B) {
	s := newStore(b, b.TempDir(), &StoreOptions{Graph: "g", Create: true})
	defer s.Close()
	rng := rand.New(rand.NewPCG(1, 1))
	const n = 16384
	keys := make([]uint64, n)
	batch := s.NewBatch()
	st := NewState()
	b.ReportAllocs()
	for b.Loop() {
		for i := range keys {
			u, v := uint32(rng.IntN(100000)), uint32(rng.IntN(100000))
			keys[i] = edgeKey(u, v)
		}
		slices.Sort(keys)
		for _, k := range keys {
			batch.PutEdge(uint32(k>>32), uint32(k), 1.5)
		}
		st.Applied++
		batch.PutState(&st)
		if err := s.Commit(batch, &st); err != nil {
			b.Fatal(err)
		}
		batch.Reset()
	}
	b.ReportMetric(float64(n*b.N)/b.Elapsed().Seconds(), "edges/s")
}

// BenchmarkRestore: read back a store of 10^5 edges on 10^4 nodes
// (dictionary, edges, the window rebuilt from them).
func BenchmarkRestore(b *testing.B) {
	s := newStore(b, b.TempDir(), &StoreOptions{Graph: "g", Create: true})
	defer s.Close()
	batch := s.NewBatch()
	for i := range 10000 {
		batch.PutNode(uint32(i), "acct-"+strconv.Itoa(i), true)
	}
	rng := rand.New(rand.NewPCG(2, 2))
	for range 100000 {
		batch.PutEdge(uint32(rng.IntN(10000)), uint32(rng.IntN(10000)), 1)
	}
	if err := s.Commit(batch, nil); err != nil {
		b.Fatal(err)
	}
	b.ReportAllocs()
	for b.Loop() {
		if _, err := s.Restore(); err != nil {
			b.Fatal(err)
		}
	}
}
