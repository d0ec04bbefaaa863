package ingest

import (
	"errors"
	"fmt"
	"io"
	"os"

	"shoal/tracker"
)

// LoadOptions configure [Load] and [LoadFile]. The zero value works.
type LoadOptions struct {
	ReaderOptions
	// Progress, if set, is called with the number of bytes read so far
	// after every read from the input and once at the end. Default nil.
	Progress func(bytesRead int64)
}

// EnsureDefaults fills in the zero fields.
func (o *LoadOptions) EnsureDefaults() { o.ReaderOptions.EnsureDefaults() }

// Validate reports every invalid field at once.
func (o *LoadOptions) Validate() error { return o.ReaderOptions.Validate() }

// Loaded is a whole input folded into a static weighted undirected graph.
type Loaded struct {
	// Edges holds each unordered pair once, U <= V, W > 0, in the order in
	// which the pair first appeared in the input. Self-loops (U == V) are
	// kept with their weight.
	Edges []tracker.Edge
	// Dict maps the external ids to the dense ids used in Edges. It holds
	// every node named by an add or by a set with a positive weight, in
	// order of first mention, including nodes that have no edge left
	// (because of node-remove, remove or set 0). Ids named only by remove,
	// set 0 or node-remove are not added.
	Dict *Dict
	// Events is the number of events read; Lines the number of lines
	// (blank and comment lines included).
	Events int
	Lines  int
}

// Load reads all of r and folds its events in input order:
//   - add adds W (1 if not given) to the pair's weight; parallel adds sum;
//   - remove without W deletes the pair; with W it subtracts, and the pair
//     goes when what is left is <= 0 (or at most 1e-12 of the weight before
//     the subtraction, which is rounding residue: 0.1+0.2-0.3 is 5.6e-17);
//   - set sets the weight (0 deletes);
//   - node-remove deletes every edge of the node (the node stays in the
//     Dict); later adds can attach it again;
//   - remove, set 0 and node-remove of an absent edge or node do nothing.
//
// Weights accumulate in float64. The first bad line stops the load and is
// returned as its *DecodeError, with no partial result; a read error is
// returned wrapped.
func Load(r io.Reader, o LoadOptions) (*Loaded, error) {
	rd, err := NewReader(r, o.ReaderOptions)
	if err != nil {
		return nil, err
	}
	rd.onRead = o.Progress
	f := newFolder()
	events := 0
	// Events are folded in batches so that the cache misses of the id and
	// pair lookups of a whole batch overlap (see folder.prefetch); the ids
	// are copied out of the reader's buffer, which the next read reuses.
	batch := make([]pending, 0, foldBatch)
	arena := make([]byte, 0, foldBatch*2*MaxIDBytes)
	for done := false; !done; {
		batch, arena = batch[:0], arena[:0]
		for len(batch) < foldBatch {
			err := rd.next()
			if err == io.EOF {
				done = true
				break
			}
			if err != nil {
				return nil, err
			}
			events++
			p := pending{ev: rd.raw, line: rd.Line()}
			a := len(arena)
			arena = append(arena, rd.raw.src...)
			b := len(arena)
			arena = append(arena, rd.raw.dst...)
			p.ev.src, p.ev.dst = arena[a:b:b], arena[b:len(arena):len(arena)]
			batch = append(batch, p)
		}
		if err := f.fold(batch); err != nil {
			return nil, fmt.Errorf("%s:%w", rd.nameOrInput(), err)
		}
	}
	if o.Progress != nil {
		o.Progress(rd.BytesRead())
	}
	return &Loaded{Edges: f.finish(), Dict: f.dict, Events: events, Lines: rd.Line()}, nil
}

// LoadFile is Load of the file at path; "-" means standard input. Errors
// name the file as path (or "stdin") unless o.Name is set.
func LoadFile(path string, o LoadOptions) (*Loaded, error) {
	if path == "-" {
		if o.Name == "" {
			o.Name = "stdin"
		}
		return Load(os.Stdin, o)
	}
	fh, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("ingest: %w", err)
	}
	defer fh.Close()
	if o.Name == "" {
		o.Name = path
	}
	return Load(fh, o)
}

// ErrDictFull is returned by Load when the input names more nodes (or more
// name bytes) than a Dict holds.
var ErrDictFull = errors.New("ingest: node dictionary full")

// removeResidue: a subtraction that leaves at most this fraction of the
// weight it started from deletes the edge.
const removeResidue = 1e-12

// folder folds events into one weighted edge per unordered pair.
//
// Node removal is lazy: removedAt[n] is the sequence number of the last
// node-remove of n, and since[i] the sequence number at which edge i last
// came alive (went from no weight to some). An edge is alive iff its
// weight is > 0 and since is later than removedAt of both ends. That makes
// every event O(1) with no adjacency lists. Both slices are allocated at
// the first node-remove: before it no edge can have lost an end, and
// since = 0 for the edges alive then is as good as their true times.
type folder struct {
	dict      *Dict
	edges     []tracker.Edge
	since     []int64 // parallel to edges once removedAt != nil
	removedAt []int64 // indexed by node id; shorter means 0
	pairs     pairTable
	seq       int64
	// small caches the ids of names that are canonical decimal numbers
	// below smallMax (most edge-list files number their nodes): small[n]
	// is the id of the name "n" plus 1, 0 if not known yet. It saves the
	// Dict's hash and probe for such names; names stay strings in the Dict.
	small []uint32
	sink  uint64 // keeps the prefetching loads alive
}

// pending is an event of the batch being folded.
type pending struct {
	ev     rawEvent
	line   int
	hs, hd uint64 // Dict hashes of src and dst; 0 for small names
	u, v   uint32
	skip   bool // a remove or set 0 that names an unknown node
}

const (
	smallMax  = 1 << 22
	foldBatch = 64
)

func newFolder() *folder {
	return &folder{dict: NewDict()}
}

// smallID reads a canonical decimal number below smallMax ("0", "17", not
// "017", "+1" or "-1"); ok is false for any other name.
func smallID(name []byte) (int, bool) {
	if len(name) == 0 || len(name) > 7 || (name[0] == '0' && len(name) > 1) {
		return 0, false
	}
	n := 0
	for _, c := range name {
		if c < '0' || c > '9' {
			return 0, false
		}
		n = n*10 + int(c-'0')
	}
	return n, n < smallMax
}

// fold applies a batch of events in order. Its three passes keep the
// results those of one event at a time: prefetch only reads; resolve maps
// the names to ids in event order (adding them to the Dict in order of
// first mention); apply folds the events in order.
func (f *folder) fold(batch []pending) error {
	f.prefetch(batch)
	for i := range batch {
		if err := f.resolve(&batch[i]); err != nil {
			return fmt.Errorf("%d: %w", batch[i].line, err)
		}
	}
	var sink uint64
	if len(f.pairs.slots) > 0 {
		for i := range batch {
			if p := &batch[i]; !p.skip && p.ev.op != OpNodeRemove {
				sink += uint64(f.pairs.slots[f.pairs.slot(pairKey(p.u, p.v))].val)
			}
		}
	}
	f.sink += sink
	for i := range batch {
		f.apply(&batch[i])
	}
	return nil
}

// prefetch computes the Dict hashes of the batch and touches the index
// slots and name bytes they lead to. The loads are independent of one
// another, so the processor overlaps their cache misses instead of taking
// them one after the other in resolve.
func (f *folder) prefetch(batch []pending) {
	d := f.dict
	var sink uint64
	touch := func(name []byte) uint64 {
		if k, ok := smallID(name); ok {
			if k < len(f.small) {
				sink += uint64(f.small[k])
			}
			return 0
		}
		h := d.hash(name)
		sink += d.slots[h>>d.shift].hash
		return h
	}
	for i := range batch {
		p := &batch[i]
		p.hs = touch(p.ev.src)
		if p.ev.op != OpNodeRemove {
			p.hd = touch(p.ev.dst)
		}
	}
	for i := range batch {
		p := &batch[i]
		for _, h := range [2]uint64{p.hs, p.hd} {
			if h != 0 {
				if s := &d.slots[h>>d.shift]; s.id1 != 0 {
					sink += uint64(d.slab[s.off])
				}
			}
		}
	}
	f.sink += sink
}

// resolve sets p.u and p.v: adds name ids for add and positive set, only
// looks them up for the other ops.
func (f *folder) resolve(p *pending) error {
	ev := &p.ev
	if ev.op == OpNodeRemove {
		p.u, p.skip = f.lookup(ev.src, p.hs)
		p.skip = !p.skip
		return nil
	}
	if ev.op == OpAdd || (ev.op == OpSet && ev.w > 0) {
		var err error
		if p.u, err = f.node(ev.src, p.hs); err != nil {
			return err
		}
		p.v, err = f.node(ev.dst, p.hd)
		return err
	}
	var ok1, ok2 bool
	p.u, ok1 = f.lookup(ev.src, p.hs)
	p.v, ok2 = f.lookup(ev.dst, p.hd)
	p.skip = !ok1 || !ok2
	return nil
}

// node returns the id of name (Dict hash h, 0 for a small name), adding it
// if absent.
func (f *folder) node(name []byte, h uint64) (uint32, error) {
	k, small := smallID(name)
	if small && k < len(f.small) && f.small[k] != 0 {
		return f.small[k] - 1, nil
	}
	if h == 0 {
		h = f.dict.hash(name)
	}
	id, ok := idHashed(f.dict, name, h)
	if !ok {
		return 0, ErrDictFull
	}
	if small {
		f.cacheSmall(k, id)
	}
	return id, nil
}

// lookup returns the id of name (Dict hash h, 0 for a small name) if
// present.
func (f *folder) lookup(name []byte, h uint64) (uint32, bool) {
	k, small := smallID(name)
	if small && k < len(f.small) && f.small[k] != 0 {
		return f.small[k] - 1, true
	}
	if h == 0 {
		h = f.dict.hash(name)
	}
	id, ok := lookupHashed(f.dict, name, h)
	if ok && small {
		f.cacheSmall(k, id)
	}
	return id, ok
}

func (f *folder) cacheSmall(k int, id uint32) {
	if k >= len(f.small) {
		n := max(2*len(f.small), k+1, 1024)
		f.small = append(f.small, make([]uint32, min(n, smallMax)-len(f.small))...)
	}
	f.small[k] = id + 1
}

func (f *folder) removedAtOf(id uint32) int64 {
	if int(id) < len(f.removedAt) {
		return f.removedAt[id]
	}
	return 0
}

// removed reports whether an end of edge i was removed after it came
// alive.
func (f *folder) removed(i uint32) bool {
	if f.removedAt == nil {
		return false
	}
	e, since := &f.edges[i], f.since[i]
	return since < f.removedAtOf(e.U) || since < f.removedAtOf(e.V)
}

func pairKey(u, v uint32) uint64 {
	if u > v {
		u, v = v, u
	}
	return uint64(u)<<32 | uint64(v)
}

// apply folds one resolved event.
func (f *folder) apply(p *pending) {
	f.seq++
	ev := &p.ev
	if p.skip {
		return
	}
	if ev.op == OpNodeRemove {
		if f.removedAt == nil {
			f.since = make([]int64, len(f.edges), cap(f.edges))
		}
		if int(p.u) >= len(f.removedAt) {
			f.removedAt = append(f.removedAt, make([]int64, f.dict.Len()-len(f.removedAt))...)
		}
		f.removedAt[p.u] = f.seq
		return
	}
	u, v := p.u, p.v
	if u > v {
		u, v = v, u
	}
	key := uint64(u)<<32 | uint64(v)
	var idx uint32
	if slot := f.pairs.find(key); slot.val != 0 {
		idx = slot.val - 1
	} else {
		if ev.op != OpAdd && !(ev.op == OpSet && ev.w > 0) {
			return // remove or set 0 of an absent pair
		}
		idx = uint32(len(f.edges))
		f.edges = append(f.edges, tracker.Edge{U: u, V: v})
		if f.removedAt != nil {
			f.since = append(f.since, 0)
		}
		f.pairs.fill(slot, key, idx)
	}
	e := &f.edges[idx]
	if e.W > 0 && f.removed(idx) {
		e.W = 0
	}
	dead := e.W <= 0
	switch ev.op {
	case OpAdd:
		if ev.hasW {
			e.W += ev.w
		} else {
			e.W++
		}
	case OpRemove:
		if !ev.hasW {
			e.W = 0
		} else if before := e.W; before > 0 {
			e.W -= ev.w
			if e.W <= before*removeResidue {
				e.W = 0
			}
		}
	case OpSet:
		e.W = ev.w
	}
	if dead && e.W > 0 && f.removedAt != nil {
		f.since[idx] = f.seq
	}
}

// finish compacts the live edges in place and returns them.
func (f *folder) finish() []tracker.Edge {
	out := f.edges[:0]
	for i := range f.edges {
		if f.edges[i].W > 0 && !f.removed(uint32(i)) {
			out = append(out, f.edges[i])
		}
	}
	f.edges, f.since, f.pairs, f.small = nil, nil, pairTable{}, nil
	return out
}

// pairTable maps a packed pair (u<<32 | v) to an edge index: open
// addressing with linear probing over one flat slice of slots (key and
// value side by side, so a probe is one cache line), Fibonacci hashing,
// kept at most half full. Nothing is ever deleted.
type pairTable struct {
	slots []pairSlot
	n     int
	shift uint
}

// pairSlot is 12 bytes: the pair as two uint32 (a uint64 key would pad
// the slot to 16).
type pairSlot struct {
	u, v uint32
	val  uint32 // edge index + 1; 0 marks an empty slot
}

func (s *pairSlot) key() uint64 { return uint64(s.u)<<32 | uint64(s.v) }

func (t *pairTable) slot(key uint64) uint64 {
	return (key * 0x9E3779B97F4A7C15) >> t.shift
}

// find returns the slot of key, or the empty slot where it would go
// (val 0). The pointer is valid until the next fill.
func (t *pairTable) find(key uint64) *pairSlot {
	if t.slots == nil {
		t.grow()
	}
	mask := uint64(len(t.slots) - 1)
	for i := t.slot(key); ; i = (i + 1) & mask {
		s := &t.slots[i]
		if s.val == 0 || s.key() == key {
			return s
		}
	}
}

// fill stores key and val in the empty slot s that find returned for key.
func (t *pairTable) fill(s *pairSlot, key uint64, val uint32) {
	*s = pairSlot{u: uint32(key >> 32), v: uint32(key), val: val + 1}
	t.n++
	if 2*t.n > len(t.slots) {
		t.grow()
	}
}

func (t *pairTable) grow() {
	size := 2 * len(t.slots)
	if size < 1024 {
		size = 1024
	}
	bits := uint(0)
	for 1<<bits < size {
		bits++
	}
	old := t.slots
	t.slots, t.shift = make([]pairSlot, size), 64-bits
	mask := uint64(size - 1)
	for _, s := range old {
		if s.val == 0 {
			continue
		}
		i := t.slot(s.key())
		for t.slots[i].val != 0 {
			i = (i + 1) & mask
		}
		t.slots[i] = s
	}
}
