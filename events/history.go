package events

import (
	"cmp"
	"encoding/binary"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"math/bits"
	"slices"
	"strconv"
	"time"

	"github.com/cockroachdb/pebble/v2"

	"shoal/snapshot"
)

// The history's constants; doc.go ("History") describes the key family.
const (
	// HistoryPrefix is the key-family byte of the community history.
	HistoryPrefix byte = 'h'
	// HistorySchema is the schema of the first line of [History.WriteJSONL].
	HistorySchema = "shoal.history/1"

	DefaultHistoryKeep = 90 * 24 * time.Hour
	DefaultMaxDead     = 1 << 20

	// MaxRefs is how many event references a community record keeps (the
	// latest); CommunityRecord.EventCount counts them all.
	MaxRefs = 64
	// MaxLinks bounds From and To of a record (the latest of each are
	// kept): a hub that absorbs a small group at every snapshot would
	// otherwise grow its record, rewritten at each merge, without end.
	MaxLinks = 64
	// MaxLineage bounds each list returned by [History.Lineage].
	MaxLineage = 10000
)

// Sub-family bytes after HistoryPrefix, in key order.
const (
	hCommunity byte = 'c'
	hNode      byte = 'n'
	hPoint     byte = 'p'
	hRef       byte = 'r'
	hSnapshot  byte = 's'

	hCommunityKeyLen = 2 + 8
	hNodeKeyLen      = 2 + 4
	hPointKeyLen     = 2 + 8 + 8
	hRefKeyLen       = 2 + 8 + 8 + 1
	hSnapshotKeyLen  = 2 + 8
)

// HistoryOptions configure a [History]. The zero value gives the defaults.
type HistoryOptions struct {
	// Keep: records of communities that died, snapshot index entries and
	// points older than Keep are dropped. Age is measured on snapshot
	// Header.Time (Unix ms of event time: the boundary the snapshot was
	// taken at), relative to the newest observed snapshot. Default 90
	// days; at least 1ms.
	Keep time.Duration
	// MaxDead bounds the number of dead community records kept; beyond it
	// the oldest deaths go first. Default 1<<20.
	MaxDead int
	// MinSize: only communities with at least MinSize members are recorded.
	// Use the MinSize given to Classify (default 3): events about smaller
	// communities find no record and are ignored.
	MinSize int
	// InMemory keeps every retained point in memory as well, so Points(nil,
	// id) and WriteJSONL answer without a store (replay). The daemon leaves
	// it off: points are then read from the store when asked for.
	InMemory bool
	// NoStore: Put will never be called (replay). Changes are counted in
	// Stats but not kept for a batch. Implies InMemory.
	NoStore bool
}

func (o *HistoryOptions) ensureDefaults() {
	if o.Keep == 0 {
		o.Keep = DefaultHistoryKeep
	}
	if o.MaxDead == 0 {
		o.MaxDead = DefaultMaxDead
	}
	if o.MinSize == 0 {
		o.MinSize = DefaultMinSize
	}
	if o.NoStore {
		o.InMemory = true
	}
}

func (o *HistoryOptions) validate() error {
	switch {
	case o.Keep < time.Millisecond:
		return fmt.Errorf("%w: history keep %v must be at least 1ms", ErrInvalid, o.Keep)
	case o.MaxDead < 0:
		return fmt.Errorf("%w: history max dead %d must not be negative", ErrInvalid, o.MaxDead)
	case o.MinSize < 1:
		return fmt.Errorf("%w: history min size %d must be at least 1", ErrInvalid, o.MinSize)
	}
	return nil
}

// SnapshotRecord is the index entry of one observed snapshot. It outlives
// the snapshot itself (package snapshot keeps only the last few).
type SnapshotRecord struct {
	ID          uint64  `json:"id"`
	Time        int64   `json:"time_ms"`
	Watermark   int64   `json:"watermark_ms"`
	Seq         uint64  `json:"seq"`
	Nodes       int     `json:"nodes"`
	Edges       int     `json:"edges"`
	Communities int     `json:"communities"`
	Modularity  float64 `json:"modularity"`
}

// Point is the figures of a community from snapshot Snapshot on, until its
// next point: a point is recorded only when they change, at birth and at
// death (Size 0 if the community left the snapshot, else its figures below
// MinSize).
type Point struct {
	Snapshot uint64  `json:"snapshot"`
	Time     int64   `json:"time_ms"`
	Size     int     `json:"size"`
	Internal float64 `json:"internal"`
	Degree   float64 `json:"degree"`
}

// Ref is a non-continue event that touched a community.
type Ref struct {
	Snapshot uint64 `json:"snapshot"` // the later snapshot of the event
	Time     int64  `json:"time_ms"`
	Type     Type   `json:"type"`
	EventID  string `json:"event"`
}

// CommunityRecord is the lifetime of one community id.
type CommunityRecord struct {
	ID uint64 `json:"community"`
	// Born is the snapshot at which the community was first recorded
	// (eligible); a community that becomes eligible again keeps it.
	Born     uint64 `json:"born"`
	BornTime int64  `json:"born_ms"`
	// Died is the snapshot at which it stopped being eligible; 0 while
	// alive.
	Died     uint64 `json:"died"`
	DiedTime int64  `json:"died_ms"`
	// From and To are the communities it came from and went to through a
	// merge, a split or a continuation whose ids differ, in the order
	// seen, at most MaxLinks each (the latest).
	From []uint64 `json:"from"`
	To   []uint64 `json:"to"`
	// Events are the last MaxRefs non-continue events that touched it, in
	// order; EventCount counts all of them.
	Events     []Ref `json:"events"`
	EventCount int   `json:"event_count"`
}

// NodeRecord is the current recorded community of a node (0: none) and
// the snapshot at which the node joined it (or left its last one).
type NodeRecord struct {
	Community uint64 `json:"community"`
	Since     uint64 `json:"since"`
	SinceTime int64  `json:"since_ms"`
}

// HistoryStats are counters for benchmarks: Bytes / CommunitySnapshots
// is the cost in bytes per community per snapshot.
type HistoryStats struct {
	// Alive and Dead count the community records held.
	Alive, Dead int
	// Snapshots counts the Observe calls of this History (not those before
	// a LoadHistory); CommunitySnapshots sums the living communities after
	// each.
	Snapshots          int
	CommunitySnapshots int64
	// Points counts the points recorded; NodeChanges the node records.
	Points      int64
	NodeChanges int64
	// Bytes counts the key and value bytes of every change recorded (sets,
	// deletes, range-delete bounds): what Put writes, or with NoStore would
	// have written. NodeBytes is the part of it from node records.
	Bytes     int64
	NodeBytes int64
}

// History is the lineage of communities over all observed snapshots,
// independent of snapshot retention. Observe folds in one snapshot, Put
// hands the changes to a batch, LoadHistory rebuilds it. Not goroutine-
// safe.
type History struct {
	o      HistoryOptions
	keepMs int64

	index []SnapshotRecord // retained, oldest first; index[0].ID is the cut
	comms map[uint64]*community
	alive []uint64 // ids of living records, increasing
	spare []uint64 // the other buffer of alive
	dead  int
	deadQ []deadEntry // deaths in order; stale after a rebirth
	deadH int         // head of deadQ
	nodes []nodeRec   // by dense node id
	seen  []uint64    // scratch bitset: eligible members of the snapshot
	last  uint64      // last observed snapshot id

	dirtyComms []uint64
	dirtyNodes []uint32
	evIDs      [][16]byte

	// The changes since the last Put: ops over byte ranges of arena.
	ops   []op
	arena []byte
	stats HistoryStats
}

type community struct {
	id                 uint64
	born, died         uint64
	bornTime, diedTime int64
	from, to           []uint64
	refs               []ref
	events             int
	last               Point // latest point
	// Stored points below trimmed are deleted; trimmedTime is the time of
	// that snapshot (see trimPoints).
	trimmed     uint64
	trimmedTime int64
	points      []Point // InMemory only
	dirty       bool
}

type ref struct {
	snap uint64
	time int64
	id   [16]byte
	typ  uint8 // index in Types
	k    uint8 // ordinal among the community's refs of snap (the key's last byte)
}

type nodeRec struct {
	comm, since uint64
	sinceTime   int64
}

type deadEntry struct{ died, id uint64 }

const (
	opSet uint8 = iota
	opDel
	opDelRange
)

// op is one change: key = arena[k0:k1], value (or range end) = arena[k1:v1].
type op struct {
	kind       uint8
	k0, k1, v1 int
}

// NewHistory returns an empty history. o may be nil (defaults); it is not
// modified.
func NewHistory(o *HistoryOptions) (*History, error) {
	var opts HistoryOptions
	if o != nil {
		opts = *o
	}
	opts.ensureDefaults()
	if err := opts.validate(); err != nil {
		return nil, err
	}
	return &History{o: opts, keepMs: opts.Keep.Milliseconds(), comms: map[uint64]*community{}}, nil
}

// LastSnapshot is the id of the last observed snapshot, 0 if none.
func (h *History) LastSnapshot() uint64 { return h.last }

// cut is the oldest retained snapshot id: points, dead records and index
// entries below it are dropped.
func (h *History) cut() uint64 {
	if len(h.index) == 0 {
		return 0
	}
	return h.index[0].ID
}

// Observe records snapshot s. evs are Classify(prev, s) (nil, with prev
// nil, for the first snapshot). Call it once per snapshot in id order;
// prev, if given, must be the last observed snapshot. History does not keep
// the snapshots. Nothing changes on error.
func (h *History) Observe(prev, s *snapshot.Snapshot, evs []Event) error {
	if s == nil {
		return fmt.Errorf("events: history: observe: %w: nil snapshot", ErrInvalid)
	}
	maxNode, err := h.check(prev, s, evs)
	if err != nil {
		return fmt.Errorf("events: history: observe snapshot %d: %w", s.ID, err)
	}
	h.logSnapshot(s)
	h.observeCommunities(s)
	h.observeEvents(s, evs)
	h.observeNodes(s, maxNode)
	h.retain(s)
	h.flushRecords()
	h.last = s.ID
	h.stats.Snapshots++
	h.stats.CommunitySnapshots += int64(len(h.alive))
	if h.o.NoStore {
		h.ops, h.arena = h.ops[:0], h.arena[:0]
	}
	return nil
}

// check validates the input before anything changes, marks the eligible
// members in h.seen and decodes the event ids into h.evIDs. It returns the
// largest eligible member (-1 if none).
func (h *History) check(prev, s *snapshot.Snapshot, evs []Event) (int, error) {
	if s.ID == 0 {
		return 0, fmt.Errorf("%w: snapshot id 0", ErrInvalid)
	}
	if h.last != 0 && s.ID <= h.last {
		return 0, fmt.Errorf("%w: snapshot %d after snapshot %d", ErrInvalid, s.ID, h.last)
	}
	if prev != nil {
		if prev.ID >= s.ID {
			return 0, fmt.Errorf("%w: previous snapshot %d is not before it", ErrInvalid, prev.ID)
		}
		if h.last != 0 && prev.ID != h.last {
			return 0, fmt.Errorf("%w: previous snapshot %d is not the last observed, %d", ErrInvalid, prev.ID, h.last)
		}
	} else if len(evs) > 0 {
		return 0, fmt.Errorf("%w: %d events without a previous snapshot", ErrInvalid, len(evs))
	}
	h.evIDs = h.evIDs[:0]
	for i := range evs {
		ev := &evs[i]
		if ev.FromSnapshot != prev.ID || ev.ToSnapshot != s.ID {
			return 0, fmt.Errorf("%w: event %d is between snapshots %d and %d", ErrInvalid, i, ev.FromSnapshot, ev.ToSnapshot)
		}
		if ev.Type.order() == len(Types) {
			return 0, fmt.Errorf("%w: event %d has type %q", ErrInvalid, i, ev.Type)
		}
		var id [16]byte
		if n, err := hex.Decode(id[:], []byte(ev.ID)); err != nil || n != 16 || len(ev.ID) != 32 {
			return 0, fmt.Errorf("%w: event %d has id %q, not 32 hex digits", ErrInvalid, i, ev.ID)
		}
		h.evIDs = append(h.evIDs, id)
	}
	maxNode := -1
	for ci := range s.Communities {
		c := &s.Communities[ci]
		if c.ID == 0 {
			return 0, fmt.Errorf("%w: community id 0 (reserved for no community)", ErrInvalid)
		}
		if ci > 0 && c.ID <= s.Communities[ci-1].ID {
			return 0, fmt.Errorf("%w: community ids not increasing at %d", ErrInvalid, c.ID)
		}
		if c.Size != len(c.Members) || c.Size == 0 {
			return 0, fmt.Errorf("%w: community %d: size %d with %d members", ErrInvalid, c.ID, c.Size, len(c.Members))
		}
		if c.Size < h.o.MinSize {
			continue
		}
		if !finite(c.Internal) || !finite(c.Degree) {
			return 0, fmt.Errorf("%w: community %d: internal %v, degree %v", ErrInvalid, c.ID, c.Internal, c.Degree)
		}
		for k := 1; k < len(c.Members); k++ {
			if c.Members[k] <= c.Members[k-1] {
				return 0, fmt.Errorf("%w: community %d: members not increasing", ErrInvalid, c.ID)
			}
		}
		maxNode = max(maxNode, int(c.Members[len(c.Members)-1]))
	}
	if n := (maxNode + 64) / 64; len(h.seen) < n {
		h.seen = append(h.seen, make([]uint64, n-len(h.seen))...)
	}
	for ci := range s.Communities {
		c := &s.Communities[ci]
		if c.Size < h.o.MinSize {
			continue
		}
		for _, v := range c.Members {
			w, bit := v/64, uint64(1)<<(v%64)
			if h.seen[w]&bit != 0 {
				clear(h.seen)
				return 0, fmt.Errorf("%w: node %d is in community %d and another", ErrInvalid, v, c.ID)
			}
			h.seen[w] |= bit
		}
	}
	return maxNode, nil
}

func finite(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }

func (h *History) logSnapshot(s *snapshot.Snapshot) {
	rec := SnapshotRecord{
		ID: s.ID, Time: s.Time, Watermark: s.Watermark, Seq: s.Seq,
		Nodes: s.Nodes, Edges: s.Edges, Communities: s.Header.Communities, Modularity: s.Modularity,
	}
	h.index = append(h.index, rec)
	k0 := len(h.arena)
	h.arena = appendHKey(h.arena, hSnapshot, s.ID)
	k1 := len(h.arena)
	h.arena = appendSnapshotRecord(h.arena, &rec)
	h.log(opSet, k0, k1)
}

// observeCommunities records births, rebirths, changed figures and deaths.
func (h *History) observeCommunities(s *snapshot.Snapshot) {
	next := h.spare[:0]
	for ci := range s.Communities {
		c := &s.Communities[ci]
		if c.Size < h.o.MinSize {
			continue
		}
		next = append(next, c.ID)
		p := Point{Snapshot: s.ID, Time: s.Time, Size: c.Size, Internal: c.Internal, Degree: c.Degree}
		r := h.comms[c.ID]
		switch {
		case r == nil:
			r = &community{id: c.ID, born: s.ID, bornTime: s.Time, trimmed: s.ID, trimmedTime: s.Time}
			h.comms[c.ID] = r
			h.markDirty(r)
			h.addPoint(r, p)
		case r.died != 0:
			// Eligible again: alive again, Born stays the first. Its entry
			// in deadQ goes stale.
			r.died, r.diedTime = 0, 0
			h.dead--
			h.markDirty(r)
			h.addPoint(r, p)
		case r.last.Size != p.Size || r.last.Internal != p.Internal || r.last.Degree != p.Degree:
			h.addPoint(r, p)
		}
	}
	// Deaths: living before, not eligible now (both lists increasing).
	j := 0
	for _, id := range h.alive {
		for j < len(next) && next[j] < id {
			j++
		}
		if j < len(next) && next[j] == id {
			continue
		}
		r := h.comms[id]
		r.died, r.diedTime = s.ID, s.Time
		h.dead++
		h.deadQ = append(h.deadQ, deadEntry{died: s.ID, id: id})
		p := Point{Snapshot: s.ID, Time: s.Time}
		if ci, ok := slices.BinarySearchFunc(s.Communities, id, func(c snapshot.Community, id uint64) int { return cmp.Compare(c.ID, id) }); ok {
			c := &s.Communities[ci]
			p.Size, p.Internal, p.Degree = c.Size, c.Internal, c.Degree
		}
		h.addPoint(r, p)
		h.markDirty(r)
	}
	h.alive, h.spare = next, h.alive
}

// observeEvents adds the event references and the From/To links.
func (h *History) observeEvents(s *snapshot.Snapshot, evs []Event) {
	var touched []uint64
	for i := range evs {
		ev := &evs[i]
		if ev.Type != Continue {
			touched = touched[:0]
			for _, sides := range [2][]Side{ev.Before, ev.After} {
				for _, sd := range sides {
					if !slices.Contains(touched, sd.Community) {
						touched = append(touched, sd.Community)
					}
				}
			}
			for _, id := range touched {
				if r := h.comms[id]; r != nil {
					h.addRef(r, ref{snap: s.ID, time: s.Time, id: h.evIDs[i], typ: uint8(ev.Type.order())})
				}
			}
		}
		// A merge has one after, a split one before, a continuation one
		// of each, so all pairs are the links; birth and death have none.
		for _, b := range ev.Before {
			for _, a := range ev.After {
				if b.Community == a.Community {
					continue
				}
				if r := h.comms[a.Community]; r != nil && addLink(&r.from, b.Community) {
					h.markDirty(r)
				}
				if r := h.comms[b.Community]; r != nil && addLink(&r.to, a.Community) {
					h.markDirty(r)
				}
			}
		}
	}
}

// addLink appends id to the list unless present, keeping the last
// MaxLinks, and reports whether the list changed.
func addLink(list *[]uint64, id uint64) bool {
	if slices.Contains(*list, id) {
		return false
	}
	if len(*list) == MaxLinks {
		copy(*list, (*list)[1:])
		*list = (*list)[:MaxLinks-1]
	}
	*list = append(*list, id)
	return true
}

func (h *History) addRef(r *community, rf ref) {
	for i := len(r.refs) - 1; i >= 0 && r.refs[i].snap == rf.snap; i-- {
		rf.k++ // at most four events touch one community in a step
	}
	if len(r.refs) == MaxRefs {
		old := r.refs[0]
		k0 := len(h.arena)
		h.arena = appendRefKey(h.arena, r.id, old.snap, old.k)
		h.log(opDel, k0, len(h.arena))
		copy(r.refs, r.refs[1:])
		r.refs = r.refs[:MaxRefs-1]
	}
	r.refs = append(r.refs, rf)
	r.events++
	h.markDirty(r)
	k0 := len(h.arena)
	h.arena = appendRefKey(h.arena, r.id, rf.snap, rf.k)
	k1 := len(h.arena)
	h.arena = append(h.arena, FormatVersion)
	h.arena = binary.AppendVarint(h.arena, rf.time)
	h.arena = append(h.arena, rf.typ)
	h.arena = append(h.arena, rf.id[:]...)
	h.log(opSet, k0, k1)
}

func (h *History) addPoint(r *community, p Point) {
	r.last = p
	if h.o.InMemory {
		r.points = append(r.points, p)
	}
	h.stats.Points++
	k0 := len(h.arena)
	h.arena = appendPointKey(h.arena, r.id, p.Snapshot)
	k1 := len(h.arena)
	h.arena = appendPoint(h.arena, &p)
	h.log(opSet, k0, k1)
}

func (h *History) markDirty(r *community) {
	if !r.dirty {
		r.dirty = true
		h.dirtyComms = append(h.dirtyComms, r.id)
	}
}

// observeNodes moves every node whose recorded community changed: one
// pass over the eligible members, one over the node records for those that
// left (h.seen marks the members; check set it).
func (h *History) observeNodes(s *snapshot.Snapshot, maxNode int) {
	if len(h.nodes) < maxNode+1 {
		h.nodes = append(h.nodes, make([]nodeRec, maxNode+1-len(h.nodes))...)
	}
	h.dirtyNodes = h.dirtyNodes[:0]
	for ci := range s.Communities {
		c := &s.Communities[ci]
		if c.Size < h.o.MinSize {
			continue
		}
		for _, v := range c.Members {
			if n := &h.nodes[v]; n.comm != c.ID {
				*n = nodeRec{comm: c.ID, since: s.ID, sinceTime: s.Time}
				h.dirtyNodes = append(h.dirtyNodes, v)
			}
		}
	}
	for v := range h.nodes {
		n := &h.nodes[v]
		if n.comm != 0 && (v/64 >= len(h.seen) || h.seen[v/64]&(1<<(v%64)) == 0) {
			*n = nodeRec{since: s.ID, sinceTime: s.Time}
			h.dirtyNodes = append(h.dirtyNodes, uint32(v))
		}
	}
	clear(h.seen)
	slices.Sort(h.dirtyNodes)
	for _, v := range h.dirtyNodes {
		n := &h.nodes[v]
		k0 := len(h.arena)
		h.arena = append(h.arena, HistoryPrefix, hNode)
		h.arena = binary.BigEndian.AppendUint32(h.arena, v)
		k1 := len(h.arena)
		h.arena = append(h.arena, FormatVersion)
		h.arena = binary.AppendUvarint(h.arena, n.comm)
		h.arena = binary.AppendUvarint(h.arena, n.since)
		h.arena = binary.AppendVarint(h.arena, n.sinceTime)
		h.log(opSet, k0, k1)
		h.stats.NodeBytes += int64(len(h.arena) - k0)
	}
	h.stats.NodeChanges += int64(len(h.dirtyNodes))
}

// retain drops the index entries older than Keep (never the newest), the
// dead records below the cut and beyond MaxDead, and trims points.
func (h *History) retain(s *snapshot.Snapshot) {
	cutoff := s.Time - h.keepMs
	if s.Time < math.MinInt64+h.keepMs {
		cutoff = math.MinInt64
	}
	drop := 0
	for drop < len(h.index)-1 && h.index[drop].Time < cutoff {
		k0 := len(h.arena)
		h.arena = appendHKey(h.arena, hSnapshot, h.index[drop].ID)
		h.log(opDel, k0, len(h.arena))
		drop++
	}
	h.index = h.index[drop:]
	cut, cutTime := h.index[0].ID, h.index[0].Time

	for h.deadH < len(h.deadQ) && h.deadQ[h.deadH].died < cut {
		h.dropDead(h.deadQ[h.deadH])
		h.deadH++
	}
	for h.dead > h.o.MaxDead && h.deadH < len(h.deadQ) {
		h.dropDead(h.deadQ[h.deadH])
		h.deadH++
	}
	if h.deadH > 1024 && h.deadH > len(h.deadQ)/2 {
		h.deadQ = h.deadQ[:copy(h.deadQ, h.deadQ[h.deadH:])]
		h.deadH = 0
	}

	// Points of living communities: below the cut only the latest stays.
	// In memory that is exact at every snapshot. In the store a range
	// delete per community per snapshot would pile up tombstones, so a
	// community's old points go in one range delete once the oldest that
	// may be stored is Keep/8 older than the cut; Points hides the ones in
	// between, so answers do not depend on when the delete ran.
	slack := h.keepMs / 8
	for _, id := range h.alive {
		r := h.comms[id]
		if h.o.InMemory {
			i, _ := slices.BinarySearchFunc(r.points, cut, func(p Point, c uint64) int { return cmp.Compare(p.Snapshot, c) })
			r.points = r.points[min(i, len(r.points)-1):]
		}
		target := min(cut, r.last.Snapshot)
		if target > r.trimmed && cutTime-r.trimmedTime >= slack {
			k0 := len(h.arena)
			h.arena = appendPointKey(h.arena, id, r.trimmed)
			k1 := len(h.arena)
			h.arena = appendPointKey(h.arena, id, target)
			h.log(opDelRange, k0, k1)
			r.trimmed, r.trimmedTime = target, cutTime
			if target != cut {
				r.trimmedTime = r.last.Time
			}
		}
	}
}

// dropDead removes the record of a dead community with all its points and
// references, unless e is stale (the community was reborn since).
func (h *History) dropDead(e deadEntry) {
	r := h.comms[e.id]
	if r == nil || r.died != e.died {
		return
	}
	delete(h.comms, e.id)
	h.dead--
	k0 := len(h.arena)
	h.arena = appendHKey(h.arena, hCommunity, e.id)
	h.log(opDel, k0, len(h.arena))
	for _, sub := range [2]byte{hPoint, hRef} {
		k0 := len(h.arena)
		h.arena = appendHKey(h.arena, sub, e.id)
		k1 := len(h.arena)
		h.arena = appendHKeyEnd(h.arena, sub, e.id)
		h.log(opDelRange, k0, k1)
	}
}

// flushRecords logs the records changed by this Observe, in id order.
func (h *History) flushRecords() {
	slices.Sort(h.dirtyComms)
	for _, id := range h.dirtyComms {
		r := h.comms[id]
		if r == nil { // dropped
			continue
		}
		r.dirty = false
		k0 := len(h.arena)
		h.arena = appendHKey(h.arena, hCommunity, id)
		k1 := len(h.arena)
		h.arena = appendCommunity(h.arena, r)
		h.log(opSet, k0, k1)
	}
	h.dirtyComms = h.dirtyComms[:0]
}

func (h *History) log(kind uint8, k0, k1 int) {
	h.ops = append(h.ops, op{kind: kind, k0: k0, k1: k1, v1: len(h.arena)})
	h.stats.Bytes += int64(len(h.arena) - k0)
}

// Put adds to b every change since the last Put: index entries, points,
// references, community and node records, and the retention deletes. Commit
// b in the same batch as the snapshot. On error nothing is forgotten (Put
// again into a fresh batch); if the commit fails, the History is ahead of
// the store: rebuild it with LoadHistory.
func (h *History) Put(b *pebble.Batch) error {
	if h.o.NoStore {
		return fmt.Errorf("events: history: put: %w: the history was made with NoStore", ErrInvalid)
	}
	for _, o := range h.ops {
		key, val := h.arena[o.k0:o.k1], h.arena[o.k1:o.v1]
		var err error
		switch o.kind {
		case opSet:
			err = b.Set(key, val, nil)
		case opDel:
			err = b.Delete(key, nil)
		case opDelRange:
			err = b.DeleteRange(key, val, nil)
		}
		if err != nil {
			return fmt.Errorf("events: history: put key %x: %w", key, err)
		}
	}
	h.ops, h.arena = h.ops[:0], h.arena[:0]
	return nil
}

// Stats returns the counters.
func (h *History) Stats() HistoryStats {
	st := h.stats
	st.Alive, st.Dead = len(h.alive), h.dead
	return st
}

// Snapshots returns the retained snapshot index, oldest first, including
// snapshots whose full record package snapshot has dropped.
func (h *History) Snapshots() []SnapshotRecord { return slices.Clone(h.index) }

// Community returns the record of community id.
func (h *History) Community(id uint64) (CommunityRecord, bool) {
	r := h.comms[id]
	if r == nil {
		return CommunityRecord{}, false
	}
	return r.record(), true
}

func (r *community) record() CommunityRecord {
	rec := CommunityRecord{
		ID: r.id, Born: r.born, BornTime: r.bornTime, Died: r.died, DiedTime: r.diedTime,
		From: append([]uint64{}, r.from...), To: append([]uint64{}, r.to...),
		Events: make([]Ref, len(r.refs)), EventCount: r.events,
	}
	for i, rf := range r.refs {
		rec.Events[i] = Ref{Snapshot: rf.snap, Time: rf.time, Type: Types[rf.typ], EventID: hex.EncodeToString(rf.id[:])}
	}
	return rec
}

// Node returns the record of dense node id v; false if v was never in a
// recorded community.
func (h *History) Node(v uint32) (NodeRecord, bool) {
	if int(v) >= len(h.nodes) || h.nodes[v].since == 0 {
		return NodeRecord{}, false
	}
	n := h.nodes[v]
	return NodeRecord{Community: n.comm, Since: n.since, SinceTime: n.sinceTime}, true
}

// Lineage returns the ancestors (transitively over From) and descendants
// (over To) of id, each sorted and at most MaxLineage, without id itself.
// Ids whose records were dropped are listed but not followed.
func (h *History) Lineage(id uint64) (ancestors, descendants []uint64) {
	walk := func(next func(*community) []uint64) []uint64 {
		seen := map[uint64]bool{id: true}
		queue, out := []uint64{id}, []uint64{}
		for q := 0; q < len(queue) && len(out) < MaxLineage; q++ {
			r := h.comms[queue[q]]
			if r == nil {
				continue
			}
			for _, x := range next(r) {
				if !seen[x] && len(out) < MaxLineage {
					seen[x] = true
					out = append(out, x)
					queue = append(queue, x)
				}
			}
		}
		slices.Sort(out)
		return out
	}
	return walk(func(r *community) []uint64 { return r.from }), walk(func(r *community) []uint64 { return r.to })
}

// keepPoint reports whether the i-th of n points is retained: at or after
// the cut, or the latest.
func keepPoint(p *Point, i, n int, cut uint64) bool { return p.Snapshot >= cut || i == n-1 }

// Points returns the retained points of community id, oldest first: those
// at or after the oldest retained snapshot, and the latest one however old.
// They are read from r (a committed store) if it is not nil, else from
// memory (HistoryOptions.InMemory).
func (h *History) Points(r pebble.Reader, id uint64) ([]Point, error) {
	cut := h.cut()
	if r == nil {
		if !h.o.InMemory {
			return nil, fmt.Errorf("events: history: points of %d: %w: no reader and no points in memory (HistoryOptions.InMemory)", id, ErrInvalid)
		}
		c := h.comms[id]
		if c == nil {
			return []Point{}, nil
		}
		out := []Point{}
		for i := range c.points {
			if keepPoint(&c.points[i], i, len(c.points), cut) {
				out = append(out, c.points[i])
			}
		}
		return out, nil
	}
	lower := appendHKey(nil, hPoint, id)
	it, err := r.NewIter(&pebble.IterOptions{LowerBound: lower, UpperBound: appendHKeyEnd(nil, hPoint, id)})
	if err != nil {
		return nil, fmt.Errorf("events: history: points of %d: %w", id, err)
	}
	var all []Point
	for valid := it.First(); valid; valid = it.Next() {
		val, err := it.ValueAndErr()
		if err != nil {
			it.Close()
			return nil, fmt.Errorf("events: history: points of %d: %w", id, err)
		}
		p, err := decodePoint(it.Key(), val)
		if err != nil {
			it.Close()
			return nil, err
		}
		all = append(all, p)
	}
	if err := it.Close(); err != nil {
		return nil, fmt.Errorf("events: history: points of %d: %w", id, err)
	}
	out := []Point{}
	for i := range all {
		if keepPoint(&all[i], i, len(all), cut) {
			out = append(out, all[i])
		}
	}
	return out, nil
}

// WriteJSONL writes the history as JSON lines (doc.go, "History"), with
// the points from memory (HistoryOptions.InMemory). name turns a dense node
// id into its external id; nil means the decimal id.
func (h *History) WriteJSONL(w io.Writer, name func(uint32) string) error {
	return h.WriteJSONLFrom(w, nil, name)
}

// WriteJSONLFrom is WriteJSONL with the points read from r (nil: memory).
func (h *History) WriteJSONLFrom(w io.Writer, r pebble.Reader, name func(uint32) string) error {
	if name == nil {
		name = func(v uint32) string { return strconv.FormatUint(uint64(v), 10) }
	}
	write := func(what string, x any) error {
		b, err := json.Marshal(x)
		if err != nil {
			return fmt.Errorf("events: history: encode %s: %w", what, err)
		}
		if _, err := w.Write(append(b, '\n')); err != nil {
			return fmt.Errorf("events: history: write %s: %w", what, err)
		}
		return nil
	}
	head := struct {
		Schema    string           `json:"schema"`
		Kind      string           `json:"kind"`
		KeepMs    int64            `json:"keep_ms"`
		MaxDead   int              `json:"max_dead"`
		MinSize   int              `json:"min_size"`
		Snapshots []SnapshotRecord `json:"snapshots"`
	}{HistorySchema, "index", h.keepMs, h.o.MaxDead, h.o.MinSize, append([]SnapshotRecord{}, h.index...)}
	if err := write("index", &head); err != nil {
		return err
	}
	ids := make([]uint64, 0, len(h.comms))
	for id := range h.comms {
		ids = append(ids, id)
	}
	slices.Sort(ids)
	for _, id := range ids {
		pts, err := h.Points(r, id)
		if err != nil {
			return err
		}
		line := struct {
			Kind string `json:"kind"`
			CommunityRecord
			Points []Point `json:"points"`
		}{"community", h.comms[id].record(), pts}
		if err := write(fmt.Sprintf("community %d", id), &line); err != nil {
			return err
		}
	}
	for v := range h.nodes {
		n := &h.nodes[v]
		if n.since == 0 {
			continue
		}
		line := struct {
			Kind string `json:"kind"`
			Node string `json:"node"`
			NodeRecord
		}{"node", name(uint32(v)), NodeRecord{Community: n.comm, Since: n.since, SinceTime: n.sinceTime}}
		if err := write(fmt.Sprintf("node %d", v), &line); err != nil {
			return err
		}
	}
	return nil
}

// LoadHistory rebuilds a History from the 'h' family in r. Only the points
// needed at every snapshot (the first and latest of each living community)
// are read, unless o.InMemory. Bytes that are wrong give an error for which
// [IsCorrupt] holds, naming the key.
func LoadHistory(r pebble.Reader, o *HistoryOptions) (*History, error) {
	h, err := NewHistory(o)
	if err != nil {
		return nil, err
	}
	err = scanH(r, hSnapshot, func(key, val []byte) error {
		if len(key) != hSnapshotKeyLen {
			return hCorrupt(key, "key of %d bytes", len(key))
		}
		rec, err := decodeSnapshotRecord(key, val)
		if err != nil {
			return err
		}
		if rec.ID == 0 {
			return hCorrupt(key, "snapshot id 0")
		}
		h.index = append(h.index, rec)
		return nil
	})
	if err != nil {
		return nil, err
	}
	var deads []deadEntry
	err = scanH(r, hCommunity, func(key, val []byte) error {
		if len(key) != hCommunityKeyLen {
			return hCorrupt(key, "key of %d bytes", len(key))
		}
		c, err := decodeCommunity(key, val)
		if err != nil {
			return err
		}
		if c.born > h.newest() {
			return hCorrupt(key, "born at snapshot %d, after the last indexed %d", c.born, h.newest())
		}
		h.comms[c.id] = c
		if c.died == 0 {
			h.alive = append(h.alive, c.id)
		} else {
			deads = append(deads, deadEntry{died: c.died, id: c.id})
		}
		return nil
	})
	if err != nil {
		return nil, err
	}
	slices.SortFunc(deads, func(a, b deadEntry) int { return cmp.Or(cmp.Compare(a.died, b.died), cmp.Compare(a.id, b.id)) })
	h.deadQ, h.dead = deads, len(deads)
	err = scanH(r, hRef, func(key, val []byte) error {
		if len(key) != hRefKeyLen {
			return hCorrupt(key, "key of %d bytes", len(key))
		}
		id := binary.BigEndian.Uint64(key[2:10])
		c := h.comms[id]
		if c == nil {
			return hCorrupt(key, "event reference of community %d, which has no record", id)
		}
		rf, err := decodeRef(key, val)
		if err != nil {
			return err
		}
		if len(c.refs) == MaxRefs || len(c.refs) == c.events {
			return hCorrupt(key, "more event references than the record's %d (at most %d)", c.events, MaxRefs)
		}
		c.refs = append(c.refs, rf)
		return nil
	})
	if err != nil {
		return nil, err
	}
	err = scanH(r, hNode, func(key, val []byte) error {
		if len(key) != hNodeKeyLen {
			return hCorrupt(key, "key of %d bytes", len(key))
		}
		v := binary.BigEndian.Uint32(key[2:])
		n, err := decodeNode(key, val)
		if err != nil {
			return err
		}
		if n.comm != 0 {
			if c := h.comms[n.comm]; c == nil || c.died != 0 {
				return hCorrupt(key, "node %d is in community %d, which is not alive", v, n.comm)
			}
		}
		if len(h.nodes) <= int(v) {
			h.nodes = append(h.nodes, make([]nodeRec, int(v)+1-len(h.nodes))...)
		}
		h.nodes[v] = n
		return nil
	})
	if err != nil {
		return nil, err
	}
	if len(h.index) == 0 && (len(h.comms) > 0 || len(h.nodes) > 0) {
		return nil, corruptf("events: history: records without a snapshot index")
	}
	if err := h.loadPoints(r); err != nil {
		return nil, err
	}
	h.last = h.newest()
	return h, nil
}

// newest is the id of the newest index entry (LoadHistory sets h.last
// from it).
func (h *History) newest() uint64 {
	if len(h.index) == 0 {
		return 0
	}
	return h.index[len(h.index)-1].ID
}

// loadPoints reads the points LoadHistory needs: with InMemory all of
// them, else the first and latest of each living community (two seeks
// each), which is what Observe and the trimming of retain use.
func (h *History) loadPoints(r pebble.Reader) error {
	cut := h.cut()
	if h.o.InMemory {
		err := scanH(r, hPoint, func(key, val []byte) error {
			p, err := decodePoint(key, val)
			if err != nil {
				return err
			}
			id := binary.BigEndian.Uint64(key[2:10])
			c := h.comms[id]
			if c == nil {
				return hCorrupt(key, "point of community %d, which has no record", id)
			}
			if len(c.points) == 0 {
				c.trimmed, c.trimmedTime = p.Snapshot, p.Time
			}
			c.points = append(c.points, p)
			c.last = p
			return nil
		})
		if err != nil {
			return err
		}
		for _, id := range h.alive {
			c := h.comms[id]
			if len(c.points) == 0 {
				return corruptf("events: history: living community %d has no point", id)
			}
			i, _ := slices.BinarySearchFunc(c.points, cut, func(p Point, c uint64) int { return cmp.Compare(p.Snapshot, c) })
			c.points = c.points[min(i, len(c.points)-1):]
		}
		for _, c := range h.comms {
			if c.died != 0 && len(c.points) == 0 {
				return corruptf("events: history: dead community %d has no point", c.id)
			}
		}
		return nil
	}
	it, err := r.NewIter(&pebble.IterOptions{LowerBound: []byte{HistoryPrefix, hPoint}, UpperBound: []byte{HistoryPrefix, hPoint + 1}})
	if err != nil {
		return fmt.Errorf("events: history: load points: %w", err)
	}
	read := func(id uint64) (Point, bool, error) {
		key := it.Key()
		if len(key) < hCommunityKeyLen || binary.BigEndian.Uint64(key[2:10]) != id {
			return Point{}, false, nil
		}
		val, err := it.ValueAndErr()
		if err != nil {
			return Point{}, false, fmt.Errorf("events: history: load points of %d: %w", id, err)
		}
		p, err := decodePoint(key, val)
		return p, err == nil, err
	}
	for _, id := range h.alive {
		c := h.comms[id]
		var first, last Point
		ok := it.SeekGE(appendHKey(nil, hPoint, id))
		if ok {
			first, ok, err = read(id)
		}
		if ok {
			if !it.SeekLT(appendHKeyEnd(nil, hPoint, id)) {
				err = fmt.Errorf("events: history: load points of %d: seek: %w", id, it.Error())
			} else {
				last, ok, err = read(id)
			}
		}
		if err == nil && !ok {
			err = corruptf("events: history: living community %d has no point", id)
		}
		if err != nil {
			it.Close()
			return err
		}
		c.trimmed, c.trimmedTime, c.last = first.Snapshot, first.Time, last
	}
	if err := it.Close(); err != nil {
		return fmt.Errorf("events: history: load points: %w", err)
	}
	for _, c := range h.comms {
		if c.died != 0 {
			// Not read: a dead record is never trimmed, and a rebirth
			// writes a point whatever the last one was.
			c.trimmed, c.trimmedTime = c.born, c.bornTime
			c.last = Point{Snapshot: c.died, Time: c.diedTime}
		}
	}
	return nil
}

// scanH calls fn for every key of sub-family sub, in key order.
func scanH(r pebble.Reader, sub byte, fn func(key, val []byte) error) error {
	it, err := r.NewIter(&pebble.IterOptions{LowerBound: []byte{HistoryPrefix, sub}, UpperBound: []byte{HistoryPrefix, sub + 1}})
	if err != nil {
		return fmt.Errorf("events: history: scan %q: %w", sub, err)
	}
	for valid := it.First(); valid; valid = it.Next() {
		val, err := it.ValueAndErr()
		if err == nil {
			err = fn(it.Key(), val)
		}
		if err != nil {
			it.Close()
			if !IsCorrupt(err) {
				err = fmt.Errorf("events: history: scan %q at key %x: %w", sub, it.Key(), err)
			}
			return err
		}
	}
	if err := it.Close(); err != nil {
		return fmt.Errorf("events: history: scan %q: %w", sub, err)
	}
	return nil
}

// Keys and values (version 1); doc.go ("History") gives the layout.

func appendHKey(dst []byte, sub byte, id uint64) []byte {
	return binary.BigEndian.AppendUint64(append(dst, HistoryPrefix, sub), id)
}

// appendHKeyEnd appends the exclusive upper bound of the keys of id in sub.
func appendHKeyEnd(dst []byte, sub byte, id uint64) []byte {
	if id == math.MaxUint64 {
		return append(dst, HistoryPrefix, sub+1)
	}
	return appendHKey(dst, sub, id+1)
}

func appendPointKey(dst []byte, id, snap uint64) []byte {
	return binary.BigEndian.AppendUint64(appendHKey(dst, hPoint, id), snap)
}

func appendRefKey(dst []byte, id, snap uint64, k uint8) []byte {
	return append(binary.BigEndian.AppendUint64(appendHKey(dst, hRef, id), snap), k)
}

func appendSnapshotRecord(dst []byte, s *SnapshotRecord) []byte {
	dst = append(dst, FormatVersion)
	dst = binary.AppendVarint(dst, s.Time)
	dst = binary.AppendVarint(dst, s.Watermark)
	dst = binary.AppendUvarint(dst, s.Seq)
	dst = binary.AppendUvarint(dst, uint64(s.Nodes))
	dst = binary.AppendUvarint(dst, uint64(s.Edges))
	dst = binary.AppendUvarint(dst, uint64(s.Communities))
	return binary.BigEndian.AppendUint64(dst, math.Float64bits(s.Modularity))
}

func appendCommunity(dst []byte, c *community) []byte {
	dst = append(dst, FormatVersion)
	dst = binary.AppendUvarint(dst, c.born)
	dst = binary.AppendVarint(dst, c.bornTime)
	dst = binary.AppendUvarint(dst, c.died)
	dst = binary.AppendVarint(dst, c.diedTime)
	dst = binary.AppendUvarint(dst, uint64(c.events))
	for _, list := range [2][]uint64{c.from, c.to} {
		dst = binary.AppendUvarint(dst, uint64(len(list)))
		for _, id := range list {
			dst = binary.AppendUvarint(dst, id)
		}
	}
	return dst
}

// appendPoint: the two floats are IEEE 754 bits, big-endian, with trailing
// zero bytes dropped (an integral weight below 2^16 takes 2 or 3 bytes);
// one byte gives both lengths.
func appendPoint(dst []byte, p *Point) []byte {
	dst = append(dst, FormatVersion)
	dst = binary.AppendVarint(dst, p.Time)
	dst = binary.AppendUvarint(dst, uint64(p.Size))
	ib, db := math.Float64bits(p.Internal), math.Float64bits(p.Degree)
	ni, nd := floatLen(ib), floatLen(db)
	dst = append(dst, byte(ni<<4|nd))
	dst = appendFloatBytes(dst, ib, ni)
	return appendFloatBytes(dst, db, nd)
}

func floatLen(x uint64) int {
	if x == 0 {
		return 0
	}
	return 8 - bits.TrailingZeros64(x)/8
}

func appendFloatBytes(dst []byte, x uint64, n int) []byte {
	for i := range n {
		dst = append(dst, byte(x>>(56-8*i)))
	}
	return dst
}

func hCorrupt(key []byte, format string, args ...any) error {
	return corruptf("events: history: key %x: %s", key, fmt.Sprintf(format, args...))
}

// hdec reads the fields of one value; the first failure sticks and names
// the key.
type hdec struct {
	key, buf []byte
	err      error
}

func newHdec(key, val []byte) *hdec {
	d := &hdec{key: key, buf: val}
	switch {
	case len(val) == 0:
		d.fail("empty value")
	case val[0] != FormatVersion:
		d.fail(fmt.Sprintf("unknown format version %d", val[0]))
	default:
		d.buf = val[1:]
	}
	return d
}

func (d *hdec) fail(what string) {
	if d.err == nil {
		d.err = hCorrupt(d.key, "%s", what)
	}
}

// uvarint accepts only the shortest encoding, so a value has one form.
func (d *hdec) uvarint(what string) uint64 {
	if d.err != nil {
		return 0
	}
	x, n := binary.Uvarint(d.buf)
	if n <= 0 || n != len(binary.AppendUvarint(nil, x)) {
		d.fail("truncated or overlong " + what)
		return 0
	}
	d.buf = d.buf[n:]
	return x
}

func (d *hdec) varint(what string) int64 {
	if d.err != nil {
		return 0
	}
	x, n := binary.Varint(d.buf)
	if n <= 0 || n != len(binary.AppendVarint(nil, x)) {
		d.fail("truncated or overlong " + what)
		return 0
	}
	d.buf = d.buf[n:]
	return x
}

func (d *hdec) count(what string, limit int) int {
	x := d.uvarint(what)
	if x > uint64(limit) {
		d.fail(fmt.Sprintf("%s %d out of range", what, x))
		return 0
	}
	return int(x)
}

func (d *hdec) bytes(what string, n int) []byte {
	if d.err != nil {
		return make([]byte, n)
	}
	if len(d.buf) < n {
		d.fail("truncated " + what)
		return make([]byte, n)
	}
	b := d.buf[:n]
	d.buf = d.buf[n:]
	return b
}

func (d *hdec) float(what string, n int) float64 {
	b := d.bytes(what, n)
	if n > 0 && b[n-1] == 0 {
		d.fail("overlong " + what)
	}
	var x uint64
	for i, c := range b {
		x |= uint64(c) << (56 - 8*i)
	}
	f := math.Float64frombits(x)
	if !finite(f) {
		d.fail(what + " is not finite")
	}
	return f
}

func (d *hdec) done() error {
	if d.err == nil && len(d.buf) != 0 {
		d.fail(fmt.Sprintf("%d trailing bytes", len(d.buf)))
	}
	return d.err
}

func decodeSnapshotRecord(key, val []byte) (SnapshotRecord, error) {
	d := newHdec(key, val)
	s := SnapshotRecord{ID: binary.BigEndian.Uint64(key[2:])}
	s.Time = d.varint("time")
	s.Watermark = d.varint("watermark")
	s.Seq = d.uvarint("seq")
	s.Nodes = d.count("nodes", math.MaxInt32)
	s.Edges = d.count("edges", math.MaxInt)
	s.Communities = d.count("communities", math.MaxInt32)
	s.Modularity = math.Float64frombits(binary.BigEndian.Uint64(d.bytes("modularity", 8)))
	return s, d.done()
}

func decodeCommunity(key, val []byte) (*community, error) {
	d := newHdec(key, val)
	c := &community{id: binary.BigEndian.Uint64(key[2:])}
	c.born = d.uvarint("born")
	c.bornTime = d.varint("born time")
	c.died = d.uvarint("died")
	c.diedTime = d.varint("died time")
	c.events = d.count("event count", math.MaxInt)
	for _, list := range [2]*[]uint64{&c.from, &c.to} {
		n := d.count("link count", MaxLinks)
		for range n {
			*list = append(*list, d.uvarint("link"))
		}
	}
	if err := d.done(); err != nil {
		return nil, err
	}
	switch {
	case c.id == 0:
		return nil, hCorrupt(key, "community id 0")
	case c.born == 0:
		return nil, hCorrupt(key, "born at snapshot 0")
	case c.died != 0 && c.died <= c.born:
		return nil, hCorrupt(key, "died at snapshot %d, not after its birth at %d", c.died, c.born)
	}
	return c, nil
}

func decodePoint(key, val []byte) (Point, error) {
	if len(key) != hPointKeyLen {
		return Point{}, hCorrupt(key, "point key of %d bytes", len(key))
	}
	d := newHdec(key, val)
	p := Point{Snapshot: binary.BigEndian.Uint64(key[10:])}
	p.Time = d.varint("time")
	p.Size = d.count("size", math.MaxInt32)
	lens := d.bytes("float lengths", 1)[0]
	ni, nd := int(lens>>4), int(lens&15)
	if ni > 8 || nd > 8 {
		d.fail(fmt.Sprintf("float lengths %#x", lens))
		ni, nd = 0, 0
	}
	p.Internal = d.float("internal", ni)
	p.Degree = d.float("degree", nd)
	if err := d.done(); err != nil {
		return Point{}, err
	}
	if p.Snapshot == 0 {
		return Point{}, hCorrupt(key, "point at snapshot 0")
	}
	return p, nil
}

func decodeRef(key, val []byte) (ref, error) {
	d := newHdec(key, val)
	rf := ref{snap: binary.BigEndian.Uint64(key[10:18]), k: key[18]}
	rf.time = d.varint("time")
	rf.typ = d.bytes("type", 1)[0]
	copy(rf.id[:], d.bytes("event id", 16))
	if err := d.done(); err != nil {
		return ref{}, err
	}
	if int(rf.typ) >= len(Types) {
		return ref{}, hCorrupt(key, "event type %d", rf.typ)
	}
	if rf.snap == 0 {
		return ref{}, hCorrupt(key, "event reference at snapshot 0")
	}
	return rf, nil
}

func decodeNode(key, val []byte) (nodeRec, error) {
	d := newHdec(key, val)
	var n nodeRec
	n.comm = d.uvarint("community")
	n.since = d.uvarint("since")
	n.sinceTime = d.varint("since time")
	if err := d.done(); err != nil {
		return nodeRec{}, err
	}
	if n.since == 0 {
		return nodeRec{}, hCorrupt(key, "since snapshot 0")
	}
	return n, nil
}
