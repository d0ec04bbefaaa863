package ingest

import (
	"bytes"
	"encoding/binary"
	"errors"
	"fmt"
	"io/fs"
	"math"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"sync"
	"syscall"
	"time"

	"github.com/cockroachdb/pebble/v2"
	"github.com/cockroachdb/pebble/v2/vfs"

	"shoal/tracker"
)

// StoreFormat is the format version of the store's keys and values (doc.go,
// "Store key space"). A store written with another version is refused.
const StoreFormat = 1

// Key-family prefixes of the store (doc.go, "Store key space"). Snapshots
// ('s') and events ('v') belong to packages snapshot and events.
const (
	prefixMeta      byte = 'm'
	prefixNode      byte = 'i'
	prefixEdge      byte = 'e'
	prefixIncrement byte = 'x'
	prefixReject    byte = 'r'
)

// Metadata key names under prefix 'm'.
const (
	metaFormat    = "format"
	metaGraph     = "graph"
	metaWindow    = "window"
	metaPseudonym = "pseudonym"
	metaState     = "state"
	metaSetting   = "set/"
)

// Store errors.
var (
	// ErrStoreVersion: the store was written by a shoal with another store
	// format version. Nothing is changed when it is returned.
	ErrStoreVersion = errors.New("ingest: store format version mismatch")
	// ErrStoreMismatch: the store belongs to another graph, or was written
	// with another window span or pseudonymisation key than asked for.
	ErrStoreMismatch = errors.New("ingest: store settings mismatch")
	// ErrNotStore: the directory holds a Pebble database that is not a shoal
	// store, or holds no store when one was expected.
	ErrNotStore = errors.New("ingest: not a shoal store")
	// ErrStoreCorrupt marks bytes in the store that cannot be right (test with
	// errors.Is).
	ErrStoreCorrupt = errors.New("ingest: corrupt store")
	// ErrStoreLocked: another process (a running daemon) has the store open.
	ErrStoreLocked = errors.New("ingest: store in use by another process")
	// ErrClosed is returned by a closed Store or Consumer.
	ErrClosed = errors.New("ingest: closed")
)

// graphName is what a graph name may be: it appears in NATS subjects and
// stream names.
var graphName = regexp.MustCompile(`^[A-Za-z0-9_-]{1,64}$`)

// ValidGraphName reports whether name can name a graph: 1..64 letters,
// digits, '-' or '_' (it is used in NATS subjects and stream names).
func ValidGraphName(name string) bool { return graphName.MatchString(name) }

// StoreOptions configure [OpenStore]. The zero value opens an existing store
// read-write without checking its settings.
type StoreOptions struct {
	// Graph is the graph name. When creating a store it is required; when
	// opening one, a non-empty Graph must match the stored name.
	Graph string
	// Window is the sliding-window span (0: no window). It is recorded when
	// the store is created and must match when it is opened again, unless
	// AnyWindow is set (read-only tools).
	Window    time.Duration
	AnyWindow bool
	// KeyID is the fingerprint of the pseudonymisation key
	// ([Pseudonymizer.KeyID]), nil without pseudonymisation. Recorded at
	// creation; a store opened with another key (or without one, or with one
	// when it was created without) is refused unless AnyKey is set.
	KeyID  []byte
	AnyKey bool
	// Create makes OpenStore create the store when the directory holds none.
	// Default false: opening a missing store fails with ErrNotStore.
	Create bool
	// ReadOnly opens the store for reading only (shoal export).
	ReadOnly bool
	// NoSync commits batches without waiting for the disk (benchmarks and
	// tests of what a crash loses; never for the daemon). Default false.
	NoSync bool
	// CacheSize is Pebble's block cache in bytes. Zero means 64 MiB.
	CacheSize int64
	// MemTableSize is Pebble's memtable size in bytes. Zero means 64 MiB
	// (a batch above half of it goes to disk as a table of its own).
	MemTableSize uint64
	// FS replaces the file system (tests: a crashable in-memory one). nil
	// means the OS.
	FS vfs.FS
	// Logger receives Pebble's log lines. nil discards them.
	Logger pebble.Logger
}

// Validate reports every problem with o at once.
func (o *StoreOptions) Validate() error {
	var errs []error
	if o.Graph != "" && !ValidGraphName(o.Graph) {
		errs = append(errs, fmt.Errorf("graph name %q: want 1..64 letters, digits, '-' or '_'", o.Graph))
	}
	if o.Create && o.Graph == "" {
		errs = append(errs, errors.New("a graph name is required to create a store"))
	}
	if o.Window < 0 {
		errs = append(errs, fmt.Errorf("window %v is negative", o.Window))
	}
	if o.CacheSize < 0 {
		errs = append(errs, fmt.Errorf("cache size %d is negative", o.CacheSize))
	}
	if o.ReadOnly && o.Create {
		errs = append(errs, errors.New("cannot create a store read-only"))
	}
	if len(errs) > 0 {
		return fmt.Errorf("ingest: store options: %w", errors.Join(errs...))
	}
	return nil
}

// Meta is what a store records about itself when it is created.
type Meta struct {
	Format int
	Graph  string
	Window time.Duration
	// KeyID is the pseudonymisation key fingerprint, nil if ids are kept
	// as they come.
	KeyID []byte
}

// State is the ingest position and the counters, written in every batch
// with the changes it accounts for (doc.go, "Exactly once").
type State struct {
	// Applied is the stream sequence of the last message applied, 0 if none.
	Applied uint64
	// Watermark is the largest event time seen (Unix ms), math.MinInt64 if
	// none.
	Watermark int64
	// EventsApplied counts the good events applied since the store was
	// created; EventsRejected the bad lines and empty messages rejected;
	// Messages the messages applied (good or bad).
	EventsApplied, EventsRejected, Messages uint64
	// NextCommunity is the tracker's next community id (tracker.NextID) when
	// the batch was written, so that ids are not handed out twice across a
	// restart.
	NextCommunity uint64
	// SnapshotEvents and SnapshotMark are the event count and the
	// event-time mark at which the snapshot trigger was last marked (the
	// daemon's trigger resumes from them after a restart); SnapshotMark is
	// math.MinInt64 before the first mark.
	SnapshotEvents uint64
	SnapshotMark   int64
}

const stateVersion = 1

// NewState returns the state of an empty store.
func NewState() State { return State{Watermark: math.MinInt64, SnapshotMark: math.MinInt64} }

func (s *State) encode(dst []byte) []byte {
	dst = append(dst, stateVersion)
	dst = binary.AppendUvarint(dst, s.Applied)
	dst = binary.AppendVarint(dst, s.Watermark)
	dst = binary.AppendUvarint(dst, s.EventsApplied)
	dst = binary.AppendUvarint(dst, s.EventsRejected)
	dst = binary.AppendUvarint(dst, s.Messages)
	dst = binary.AppendUvarint(dst, s.NextCommunity)
	dst = binary.AppendUvarint(dst, s.SnapshotEvents)
	return binary.AppendVarint(dst, s.SnapshotMark)
}

func decodeState(b []byte) (State, error) {
	var s State
	if len(b) < 1 || b[0] != stateVersion {
		return s, fmt.Errorf("%w: state record version", ErrStoreCorrupt)
	}
	b = b[1:]
	ok := true
	u := func(dst *uint64) {
		n := 0
		if ok {
			*dst, n = binary.Uvarint(b)
		}
		ok = ok && n > 0
		if ok {
			b = b[n:]
		}
	}
	i := func(dst *int64) {
		n := 0
		if ok {
			*dst, n = binary.Varint(b)
		}
		ok = ok && n > 0
		if ok {
			b = b[n:]
		}
	}
	u(&s.Applied)
	i(&s.Watermark)
	u(&s.EventsApplied)
	u(&s.EventsRejected)
	u(&s.Messages)
	u(&s.NextCommunity)
	u(&s.SnapshotEvents)
	i(&s.SnapshotMark)
	if !ok || len(b) != 0 {
		return s, fmt.Errorf("%w: state record truncated or too long", ErrStoreCorrupt)
	}
	return s, nil
}

// Store is the daemon's durable graph in one Pebble database: the node
// dictionary, the edges, the window increments, the ingest state, the
// rejects outbox, and (through packages snapshot and events) snapshots and
// the event outbox. See doc.go for the key space. One process opens a store
// at a time. Its methods may be called from several goroutines; batches
// are not shared.
type Store struct {
	db   *pebble.DB
	meta Meta
	mu   struct {
		sync.Mutex
		state State
	}
	sync   *pebble.WriteOptions
	dir    string
	closed bool
}

var _ pebble.Reader = (*pebble.DB)(nil)

// OpenStore opens (or, with o.Create, creates) the store in dir. It first
// reads the format version with the database opened read-only, so that a
// store of another version is refused with [ErrStoreVersion] before
// anything is written; a store of another graph, window span or key gives
// [ErrStoreMismatch]; a store held by another process gives
// [ErrStoreLocked].
func OpenStore(dir string, o *StoreOptions) (*Store, error) {
	if o == nil {
		o = &StoreOptions{}
	}
	if err := o.Validate(); err != nil {
		return nil, err
	}
	fsys := o.FS
	if fsys == nil {
		fsys = vfs.Default
	}
	exists, err := storeExists(fsys, dir)
	if err != nil {
		return nil, err
	}
	if !exists && !o.Create {
		return nil, fmt.Errorf("%w: no store in %s", ErrNotStore, dir)
	}
	if exists {
		// Check the version and settings with the database read-only:
		// a refusal must leave the store exactly as it was.
		db, err := openPebble(dir, o, fsys, true)
		if err != nil {
			return nil, err
		}
		meta, err := readMeta(db)
		cerr := db.Close()
		if err != nil {
			return nil, fmt.Errorf("%w (in %s)", err, dir)
		}
		if cerr != nil {
			return nil, fmt.Errorf("ingest: open store %s: %w", dir, cerr)
		}
		if err := checkMeta(meta, o); err != nil {
			return nil, fmt.Errorf("%w (store in %s)", err, dir)
		}
	}
	db, err := openPebble(dir, o, fsys, o.ReadOnly)
	if err != nil {
		return nil, err
	}
	s := &Store{db: db, dir: dir, sync: pebble.Sync}
	if o.NoSync {
		s.sync = pebble.NoSync
	}
	if !exists {
		s.meta = Meta{Format: StoreFormat, Graph: o.Graph, Window: o.Window, KeyID: o.KeyID}
		s.mu.state = NewState()
		if err := s.writeMeta(); err != nil {
			db.Close()
			return nil, err
		}
	} else {
		if s.meta, err = readMeta(db); err != nil {
			db.Close()
			return nil, err
		}
		if s.mu.state, err = readState(db); err != nil {
			db.Close()
			return nil, err
		}
	}
	return s, nil
}

// storeExists reports whether dir holds a Pebble database.
func storeExists(fsys vfs.FS, dir string) (bool, error) {
	names, err := fsys.List(dir)
	if errors.Is(err, fs.ErrNotExist) || errors.Is(err, os.ErrNotExist) {
		return false, nil
	}
	if err != nil {
		return false, fmt.Errorf("ingest: open store %s: %w", dir, err)
	}
	for _, n := range names {
		if n == "CURRENT" || (len(n) > 8 && n[:8] == "MANIFEST") || (len(n) > 7 && n[:7] == "marker.") {
			return true, nil
		}
	}
	return false, nil
}

func openPebble(dir string, o *StoreOptions, fsys vfs.FS, readOnly bool) (*pebble.DB, error) {
	po := &pebble.Options{
		FS:                 fsys,
		ReadOnly:           readOnly,
		Logger:             o.Logger,
		FormatMajorVersion: pebble.FormatNewest,
		// Small values and keys with long common prefixes: columnar blocks
		// (FormatNewest) and the default Snappy compression keep an edge
		// under 32 bytes on disk (see the ingest benchmark).
	}
	if po.Logger == nil {
		po.Logger = quietLogger{}
	}
	po.MemTableSize = o.MemTableSize
	if po.MemTableSize == 0 {
		po.MemTableSize = 64 << 20
	}
	cache := o.CacheSize
	if cache == 0 {
		cache = 64 << 20
	}
	c := pebble.NewCache(cache)
	defer c.Unref()
	po.Cache = c
	if readOnly {
		po.FormatMajorVersion = pebble.FormatDefault
	}
	db, err := pebble.Open(dir, po)
	if err != nil {
		if isLockError(err) {
			return nil, fmt.Errorf("%w: %s (is the daemon running?): %v", ErrStoreLocked, dir, err)
		}
		return nil, fmt.Errorf("ingest: open store %s: %w", dir, err)
	}
	return db, nil
}

// isLockError recognises Pebble's refusal to open a directory locked by
// another process (flock: EAGAIN) or by this one.
func isLockError(err error) bool {
	if errors.Is(err, syscall.EAGAIN) {
		return true
	}
	msg := err.Error()
	return strings.Contains(msg, "lock held") || strings.Contains(msg, "could not lock") || strings.Contains(msg, "resource temporarily unavailable")
}

// quietLogger discards Pebble's informational logs; fatal errors still
// stop the process, as Pebble requires.
type quietLogger struct{}

func (quietLogger) Infof(string, ...any)         {}
func (quietLogger) Errorf(string, ...any)        {}
func (quietLogger) Fatalf(f string, args ...any) { panic(fmt.Sprintf("ingest: pebble: "+f, args...)) }

func metaKey(name string) []byte { return append([]byte{prefixMeta}, name...) }

func readMeta(r pebble.Reader) (Meta, error) {
	var m Meta
	v, ok, err := get(r, metaKey(metaFormat))
	if err != nil {
		return m, err
	}
	if !ok {
		return m, fmt.Errorf("%w: no format version record", ErrNotStore)
	}
	if len(v) != 1 {
		return m, fmt.Errorf("%w: format version record of %d bytes", ErrStoreCorrupt, len(v))
	}
	m.Format = int(v[0])
	if m.Format != StoreFormat {
		return m, fmt.Errorf("%w: the store has format version %d, this shoal reads version %d; "+
			"export it with the shoal that wrote it, or start a new store in another directory", ErrStoreVersion, m.Format, StoreFormat)
	}
	v, ok, err = get(r, metaKey(metaGraph))
	if err != nil {
		return m, err
	}
	if !ok {
		return m, fmt.Errorf("%w: no graph record", ErrStoreCorrupt)
	}
	m.Graph = string(v)
	v, ok, err = get(r, metaKey(metaWindow))
	if err != nil {
		return m, err
	}
	if !ok || len(v) != 8 {
		return m, fmt.Errorf("%w: window record", ErrStoreCorrupt)
	}
	m.Window = time.Duration(binary.BigEndian.Uint64(v)) * time.Millisecond
	v, ok, err = get(r, metaKey(metaPseudonym))
	if err != nil {
		return m, err
	}
	if ok && len(v) > 0 {
		m.KeyID = v
	}
	return m, nil
}

func checkMeta(m Meta, o *StoreOptions) error {
	if o.Graph != "" && m.Graph != o.Graph {
		return fmt.Errorf("%w: the store holds graph %q, not %q", ErrStoreMismatch, m.Graph, o.Graph)
	}
	if !o.AnyWindow && m.Window.Milliseconds() != o.Window.Milliseconds() {
		return fmt.Errorf("%w: the store was built with window %v, not %v (a store keeps the window it was created with)",
			ErrStoreMismatch, windowText(m.Window), windowText(o.Window))
	}
	if !o.AnyKey && !bytes.Equal(m.KeyID, o.KeyID) {
		switch {
		case m.KeyID == nil:
			return fmt.Errorf("%w: the store holds ids as they came; it cannot be pseudonymised now", ErrStoreMismatch)
		case o.KeyID == nil:
			return fmt.Errorf("%w: the store holds pseudonymised ids; give the same --pseudonymize-key-file", ErrStoreMismatch)
		default:
			return fmt.Errorf("%w: the store was pseudonymised with another key", ErrStoreMismatch)
		}
	}
	return nil
}

func windowText(d time.Duration) string {
	if d == 0 {
		return "none"
	}
	return d.String()
}

func readState(r pebble.Reader) (State, error) {
	v, ok, err := get(r, metaKey(metaState))
	if err != nil {
		return State{}, err
	}
	if !ok {
		return NewState(), nil
	}
	return decodeState(v)
}

// get returns a copy of the value of key.
func get(r pebble.Reader, key []byte) ([]byte, bool, error) {
	v, closer, err := r.Get(key)
	if errors.Is(err, pebble.ErrNotFound) {
		return nil, false, nil
	}
	if err != nil {
		return nil, false, fmt.Errorf("ingest: store: get %q: %w", key, err)
	}
	out := append([]byte(nil), v...)
	closer.Close()
	return out, true, nil
}

func (s *Store) writeMeta() error {
	b := s.db.NewBatch()
	defer b.Close()
	var win [8]byte
	binary.BigEndian.PutUint64(win[:], uint64(s.meta.Window.Milliseconds()))
	sets := []struct {
		k string
		v []byte
	}{
		{metaGraph, []byte(s.meta.Graph)},
		{metaWindow, win[:]},
		{metaPseudonym, s.meta.KeyID},
		{metaState, s.mu.state.encode(nil)},
		// The version goes last in key order too, but what matters is that
		// the batch is atomic: a store either has all of these or none.
		{metaFormat, []byte{StoreFormat}},
	}
	for _, kv := range sets {
		if err := b.Set(metaKey(kv.k), kv.v, nil); err != nil {
			return fmt.Errorf("ingest: create store: %w", err)
		}
	}
	if err := b.Commit(pebble.Sync); err != nil {
		return fmt.Errorf("ingest: create store: %w", err)
	}
	return nil
}

// Setting returns the value of a named setting the daemon keeps with the
// store (the snapshot schedule: the settings of a store are kept across
// restarts so that a restart without the flags keeps doing the same), and
// whether it is set. Settings live under 'm' "set/" + name.
func (s *Store) Setting(name string) ([]byte, bool, error) {
	return get(s.db, metaKey(metaSetting+name))
}

// PutSetting records a named setting (synced).
func (s *Store) PutSetting(name string, v []byte) error {
	if err := s.db.Set(metaKey(metaSetting+name), v, pebble.Sync); err != nil {
		return fmt.Errorf("ingest: store setting %s: %w", name, err)
	}
	return nil
}

// SetWindow changes the window span of the store: adds folded from now on
// count for the new span (reopen, or restore, to use it), increments
// already stored keep their expiry. A window cannot be turned on or off:
// a store without one keeps no increments.
func (s *Store) SetWindow(span time.Duration) error {
	if (span <= 0) != (s.meta.Window <= 0) {
		return fmt.Errorf("%w: window %v -> %v: a window cannot be turned on or off on an existing store", ErrStoreMismatch, windowText(s.meta.Window), windowText(span))
	}
	var win [8]byte
	binary.BigEndian.PutUint64(win[:], uint64(span.Milliseconds()))
	if err := s.db.Set(metaKey(metaWindow), win[:], pebble.Sync); err != nil {
		return fmt.Errorf("ingest: store: set window: %w", err)
	}
	s.meta.Window = span
	return nil
}

// Meta returns what the store recorded at creation.
func (s *Store) Meta() Meta { return s.meta }

// State returns the state as of the last commit (or as opened).
func (s *Store) State() State {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.mu.state
}

// DB returns the Pebble database, for packages snapshot and events to read
// and for their batches. Do not write keys of this package's families.
func (s *Store) DB() *pebble.DB { return s.db }

// Dir returns the store's directory.
func (s *Store) Dir() string { return s.dir }

// Close closes the database. A second call returns ErrClosed.
func (s *Store) Close() error {
	if s.closed {
		return ErrClosed
	}
	s.closed = true
	if err := s.db.Close(); err != nil {
		return fmt.Errorf("ingest: close store: %w", err)
	}
	return nil
}

// Batch collects the writes of one fetched batch of messages: node
// additions, edge weights, window increments, rejects, the state, and
// whatever packages snapshot and events add to [Batch.Pebble]. Nothing is
// visible until [Store.Commit].
type Batch struct {
	b   *pebble.Batch
	key []byte
	val []byte
	// Snapshots counts the snapshots a caller wrote into the batch; the
	// consumer reports it in CommitInfo once the batch is committed.
	Snapshots int
}

// NewBatch returns an empty batch.
func (s *Store) NewBatch() *Batch { return &Batch{b: s.db.NewBatch()} }

// Pebble returns the underlying batch, for snapshot.Write and events.Put.
func (b *Batch) Pebble() *pebble.Batch { return b.b }

// Empty reports whether the batch holds no write.
func (b *Batch) Empty() bool { return b.b.Empty() }

// Reset empties the batch for reuse.
func (b *Batch) Reset() { b.b.Reset() }

// Close releases the batch.
func (b *Batch) Close() error { return b.b.Close() }

func appendNodeKey(dst []byte, id uint32) []byte {
	return binary.BigEndian.AppendUint32(append(dst, prefixNode), id)
}

func appendEdgeKey(dst []byte, u, v uint32) []byte {
	if u > v {
		u, v = v, u
	}
	dst = binary.BigEndian.AppendUint32(append(dst, prefixEdge), u)
	return binary.BigEndian.AppendUint32(dst, v)
}

// expiryBits maps an int64 expiry to a uint64 whose big-endian bytes sort
// in numeric order (the sign bit flipped).
func expiryBits(t int64) uint64 { return uint64(t) ^ (1 << 63) }

func appendIncrementKey(dst []byte, inc *Increment) []byte {
	u, v := inc.U, inc.V
	if u > v {
		u, v = v, u
	}
	dst = binary.BigEndian.AppendUint64(append(dst, prefixIncrement), expiryBits(inc.Expiry))
	dst = binary.BigEndian.AppendUint32(dst, u)
	dst = binary.BigEndian.AppendUint32(dst, v)
	return binary.BigEndian.AppendUint64(dst, inc.Seq)
}

// appendWeight encodes w > 0 as its IEEE 754 bits, big-endian, without the
// trailing zero bytes: 1.0 takes 2 bytes, any float at most 8.
func appendWeight(dst []byte, w float64) []byte {
	var b [8]byte
	binary.BigEndian.PutUint64(b[:], math.Float64bits(w))
	n := 8
	for n > 1 && b[n-1] == 0 {
		n--
	}
	return append(dst, b[:n]...)
}

func decodeWeight(v []byte) (float64, error) {
	if len(v) == 0 || len(v) > 8 {
		return 0, fmt.Errorf("%w: weight of %d bytes", ErrStoreCorrupt, len(v))
	}
	var b [8]byte
	copy(b[:], v)
	w := math.Float64frombits(binary.BigEndian.Uint64(b[:]))
	if !(w > 0) || math.IsInf(w, 0) {
		return 0, fmt.Errorf("%w: weight %v", ErrStoreCorrupt, w)
	}
	return w, nil
}

// Node flags (first byte of a node record).
const nodeAbsent byte = 1

// PutNode records the external id of node id and whether it is present in
// the graph (an id stays in the dictionary after a node-remove, absent).
func (b *Batch) PutNode(id uint32, name string, present bool) error {
	b.key = appendNodeKey(b.key[:0], id)
	flags := byte(0)
	if !present {
		flags = nodeAbsent
	}
	b.val = append(append(b.val[:0], flags), name...)
	if err := b.b.Set(b.key, b.val, nil); err != nil {
		return fmt.Errorf("ingest: batch: node %d: %w", id, err)
	}
	return nil
}

// PutEdge records the weight of edge {u, v}; w == 0 deletes it.
func (b *Batch) PutEdge(u, v uint32, w float64) error {
	b.key = appendEdgeKey(b.key[:0], u, v)
	var err error
	if w == 0 {
		err = b.b.Delete(b.key, nil)
	} else {
		b.val = appendWeight(b.val[:0], w)
		err = b.b.Set(b.key, b.val, nil)
	}
	if err != nil {
		return fmt.Errorf("ingest: batch: edge: %w", err)
	}
	return nil
}

// PutIncrement records a window increment as the window's observer reports
// it: W > 0 puts it, W == 0 deletes it.
func (b *Batch) PutIncrement(inc Increment) error {
	b.key = appendIncrementKey(b.key[:0], &inc)
	var err error
	if inc.W == 0 {
		err = b.b.Delete(b.key, nil)
	} else {
		b.val = appendWeight(b.val[:0], inc.W)
		err = b.b.Set(b.key, b.val, nil)
	}
	if err != nil {
		return fmt.Errorf("ingest: batch: increment: %w", err)
	}
	return nil
}

// PutState records the ingest state; the consumer writes it last in every
// batch.
func (b *Batch) PutState(st *State) error {
	b.val = st.encode(b.val[:0])
	if err := b.b.Set(metaKey(metaState), b.val, nil); err != nil {
		return fmt.Errorf("ingest: batch: state: %w", err)
	}
	return nil
}

// Commit writes the batch durably (synced to disk unless the store was
// opened with NoSync) and, if st is not nil, records st as the store's
// state. The batch may be reused after Reset.
func (s *Store) Commit(b *Batch, st *State) error {
	if s.closed {
		return ErrClosed
	}
	if err := s.db.Apply(b.b, s.sync); err != nil {
		return fmt.Errorf("ingest: commit: %w", err)
	}
	if st != nil {
		s.mu.Lock()
		s.mu.state = *st
		s.mu.Unlock()
	}
	return nil
}

// Restored is the in-memory state rebuilt from a store at start.
type Restored struct {
	// Dict holds the external ids in id order.
	Dict *Dict
	// Present tells, per node id, whether the node is in the graph.
	Present []bool
	// Edges lists every edge once, U <= V, in key order.
	Edges []tracker.Edge
	// Window holds the live increments (one per edge without a window),
	// its watermark moved to the stored one.
	Window *Window
	// State is the stored state.
	State State
}

// Graph returns a tracker graph of the restored edges on Dict.Len() nodes,
// with the absent nodes removed.
func (r *Restored) Graph() *tracker.Graph {
	g := tracker.NewGraph(r.Dict.Len(), r.Edges)
	for i, p := range r.Present {
		if !p {
			g.RemoveNode(uint32(i), nil)
		}
	}
	return g
}

// Restore reads the dictionary, the edges and the window increments back.
// Without a window the increments are the edges (one each, never
// expiring); with one they are read from family 'x'. It checks that the
// ids are dense, the names unique, every edge names known nodes, and, with
// a window, that each edge's increments sum to its stored weight.
func (s *Store) Restore() (*Restored, error) {
	r := &Restored{Dict: NewDict(), State: s.State()}
	err := scan(s.db, prefixNode, func(k, v []byte) error {
		if len(k) != 5 || len(v) < 2 {
			return fmt.Errorf("%w: node record", ErrStoreCorrupt)
		}
		id := binary.BigEndian.Uint32(k[1:])
		if int(id) != r.Dict.Len() {
			return fmt.Errorf("%w: node id %d where %d was expected", ErrStoreCorrupt, id, r.Dict.Len())
		}
		if got, _ := r.Dict.idBytes(v[1:]); got != id {
			return fmt.Errorf("%w: node name of id %d repeats id %d", ErrStoreCorrupt, id, got)
		}
		r.Present = append(r.Present, v[0]&nodeAbsent == 0)
		return nil
	})
	if err != nil {
		return nil, err
	}
	n := uint32(r.Dict.Len())
	err = scan(s.db, prefixEdge, func(k, v []byte) error {
		if len(k) != 9 {
			return fmt.Errorf("%w: edge key of %d bytes", ErrStoreCorrupt, len(k))
		}
		u, w := binary.BigEndian.Uint32(k[1:]), binary.BigEndian.Uint32(k[5:])
		if u > w || w >= n {
			return fmt.Errorf("%w: edge %d-%d with %d nodes", ErrStoreCorrupt, u, w, n)
		}
		wt, err := decodeWeight(v)
		if err != nil {
			return err
		}
		r.Edges = append(r.Edges, tracker.Edge{U: u, V: w, W: wt})
		return nil
	})
	if err != nil {
		return nil, err
	}
	win := NewWindow(s.meta.Window)
	if s.meta.Window == 0 {
		for i, e := range r.Edges {
			if err := win.Restore(Increment{Expiry: math.MaxInt64, U: e.U, V: e.V, W: e.W, Seq: uint64(i) + 1}); err != nil {
				return nil, err
			}
		}
	} else {
		err = scan(s.db, prefixIncrement, func(k, v []byte) error {
			if len(k) != 25 {
				return fmt.Errorf("%w: increment key of %d bytes", ErrStoreCorrupt, len(k))
			}
			inc := Increment{
				Expiry: int64(binary.BigEndian.Uint64(k[1:]) ^ (1 << 63)),
				U:      binary.BigEndian.Uint32(k[9:]),
				V:      binary.BigEndian.Uint32(k[13:]),
				Seq:    binary.BigEndian.Uint64(k[17:]),
			}
			if inc.U > inc.V || inc.V >= n {
				return fmt.Errorf("%w: increment of edge %d-%d with %d nodes", ErrStoreCorrupt, inc.U, inc.V, n)
			}
			var err error
			if inc.W, err = decodeWeight(v); err != nil {
				return err
			}
			return win.Restore(inc)
		})
		if err != nil {
			return nil, err
		}
		if win.Edges() != len(r.Edges) {
			return nil, fmt.Errorf("%w: %d edges but increments for %d", ErrStoreCorrupt, len(r.Edges), win.Edges())
		}
		for _, e := range r.Edges {
			if w := win.Weight(e.U, e.V); math.Abs(w-e.W) > 1e-9*e.W {
				return nil, fmt.Errorf("%w: edge %d-%d weighs %v, its increments %v", ErrStoreCorrupt, e.U, e.V, e.W, w)
			}
		}
	}
	if r.State.Watermark != math.MinInt64 {
		if k := win.Expire(r.State.Watermark, nil); k != 0 {
			return nil, fmt.Errorf("%w: %d increments expired before the stored watermark", ErrStoreCorrupt, k)
		}
	}
	r.Window = win
	return r, nil
}

// scan calls fn for each key of a family in order; k and v are valid only
// during the call.
func scan(r pebble.Reader, prefix byte, fn func(k, v []byte) error) error {
	it, err := r.NewIter(&pebble.IterOptions{LowerBound: []byte{prefix}, UpperBound: []byte{prefix + 1}})
	if err != nil {
		return fmt.Errorf("ingest: store: scan %q: %w", prefix, err)
	}
	for ok := it.First(); ok; ok = it.Next() {
		v, err := it.ValueAndErr()
		if err != nil {
			it.Close()
			return fmt.Errorf("ingest: store: scan %q: %w", prefix, err)
		}
		if err := fn(it.Key(), v); err != nil {
			it.Close()
			return err
		}
	}
	if err := it.Close(); err != nil {
		return fmt.Errorf("ingest: store: scan %q: %w", prefix, err)
	}
	return nil
}

// StoredEdge is one edge as shoal export prints it.
type StoredEdge struct {
	Src, Dst string
	W        float64
}

// Nodes calls fn for every node of the dictionary in id order with its
// external id and whether it is present in the graph.
func (s *Store) Nodes(fn func(id uint32, name string, present bool) error) error {
	return scan(s.db, prefixNode, func(k, v []byte) error {
		if len(k) != 5 || len(v) < 2 {
			return fmt.Errorf("%w: node record", ErrStoreCorrupt)
		}
		return fn(binary.BigEndian.Uint32(k[1:]), string(v[1:]), v[0]&nodeAbsent == 0)
	})
}

// Edges calls fn for every stored edge in key order (internal ids, U <= V).
func (s *Store) Edges(fn func(u, v uint32, w float64) error) error {
	return scan(s.db, prefixEdge, func(k, v []byte) error {
		if len(k) != 9 {
			return fmt.Errorf("%w: edge key of %d bytes", ErrStoreCorrupt, len(k))
		}
		w, err := decodeWeight(v)
		if err != nil {
			return err
		}
		return fn(binary.BigEndian.Uint32(k[1:]), binary.BigEndian.Uint32(k[5:]), w)
	})
}

// Increments calls fn for every stored window increment in key order
// (expiry, U, V, Seq).
func (s *Store) Increments(fn func(inc Increment) error) error {
	return scan(s.db, prefixIncrement, func(k, v []byte) error {
		if len(k) != 25 {
			return fmt.Errorf("%w: increment key of %d bytes", ErrStoreCorrupt, len(k))
		}
		w, err := decodeWeight(v)
		if err != nil {
			return err
		}
		return fn(Increment{
			Expiry: int64(binary.BigEndian.Uint64(k[1:]) ^ (1 << 63)),
			U:      binary.BigEndian.Uint32(k[9:]),
			V:      binary.BigEndian.Uint32(k[13:]),
			Seq:    binary.BigEndian.Uint64(k[17:]),
			W:      w,
		})
	})
}

// DiskUsage returns the bytes the database takes on disk (Pebble's
// metrics: tables, WAL files kept for reuse, manifest).
func (s *Store) DiskUsage() uint64 { return s.db.Metrics().DiskSpaceUsage() }

// TableBytes returns the bytes of the database's tables (Pebble's metrics,
// all levels): the data at rest, without the write-ahead log.
func (s *Store) TableBytes() uint64 { return uint64(s.db.Metrics().Total().TablesSize) }

// EdgeBytes estimates the bytes the edge family takes in the tables
// (Pebble's EstimateDiskUsage over ['e', 'f')).
func (s *Store) EdgeBytes() (uint64, error) {
	return s.db.EstimateDiskUsage([]byte{prefixEdge}, []byte{prefixEdge + 1})
}

// StoreDir returns the directory of the store inside a daemon data
// directory.
func StoreDir(dataDir string) string { return filepath.Join(dataDir, "store") }
