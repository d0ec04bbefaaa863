package ingest

import (
	"cmp"
	"errors"
	"fmt"
	"math"
	"slices"
	"time"

	"shoal/tracker"
)

// Increment is one windowed contribution to the weight of an edge: what an
// add put there, less what removes with a weight have consumed of it.
type Increment struct {
	// Expiry is the event time (Unix ms) at which the increment stops
	// counting: its add's ts plus the span, saturated at math.MaxInt64.
	// Without a window (span 0) it is math.MaxInt64.
	Expiry int64
	// U, V are the edge's dense node ids, U <= V.
	U, V uint32
	// W is the weight the increment holds now, > 0. In an observer call,
	// W == 0 means the increment is gone (expired, removed or consumed).
	W float64
	// Seq numbers the increments of a window from 1 in order of creation;
	// it breaks ties between equal expiries and, with Expiry, U and V,
	// keys the increment in the store (family 'x'; doc.go, Store key space).
	Seq uint64
}

// ErrBadIncrement is returned by [Window.Restore] for an increment that
// cannot be in a window (weight not finite and positive, or a sequence
// number of 0).
var ErrBadIncrement = errors.New("ingest: bad window increment")

// residue is the fraction of an edge's weight below which what is left after
// a subtraction is rounding residue (0.1+0.2-0.3 is 5.6e-17), as in [Load].
const residue = 1e-12

const noIdx = ^uint32(0)

// Window is the sliding window of edge increments (doc.go, Sliding
// window), in memory.
//
// # Semantics
//
// NewWindow(span) makes a window in which an add at event time ts counts
// from ts until ts+span, its expiry. The watermark is the largest time
// passed to [Window.Expire] (math.MinInt64 before the first call); the
// caller passes the largest ts seen, so the watermark is the event-time
// watermark of the stream. The window keeps this invariant:
//
//	the weight of an edge is exactly the sum of its increments whose
//	expiry is after the watermark, and the window holds no other increments.
//
// The operations, one per event op:
//
//   - [Window.Add](ts, u, v, w) adds an increment of w expiring at ts+span,
//     unless that is at or before the watermark (a late add that would
//     already have expired: nothing is stored and Add returns false).
//   - [Window.Remove](u, v), a remove without weight, drops every increment
//     of the edge.
//   - [Window.Subtract](u, v, w), a remove with weight, consumes w from the
//     edge's increments oldest expiry first (ties: lowest Seq first); an
//     increment consumed whole is dropped, one consumed in part keeps the
//     rest. When what would be left of the edge is at most 1e-12 of its
//     weight (rounding residue, as in [Load]) the edge goes whole.
//   - [Window.Set](ts, u, v, w) drops the edge's increments and adds one of
//     w at ts (none for w == 0, or when it would already have expired).
//   - [Window.RemoveNode](u) drops the increments of all u's edges.
//   - [Window.Expire](watermark, fn) moves the watermark up (never down) and
//     pops every increment with expiry <= watermark in (expiry, Seq) order,
//     calling fn with the weight to subtract from the edge and whether the
//     edge has no increment left.
//
// [Window.AppendChanges] does all of this for one event and returns the
// matching tracker changes, so that the daemon and shoal replay turn the
// same events into the same changes.
//
// With span <= 0 there is no window: increments never expire, and the adds
// of an edge fold into one increment (Expiry math.MaxInt64, the Seq of the
// first add), so the window is an exact record of the current edges.
//
// # Persistence
//
// Every creation, change and drop of an increment is reported to the
// observer set by [Window.SetObserver], as the increment's new state
// (W == 0: gone), in the order they happen. A store that applies these
// reports (put on W > 0, delete on W == 0, keyed by Expiry, U, V, Seq)
// holds exactly the live increments; [Window.Restore] puts them back into
// a new window, after which the caller calls Expire with the stored
// watermark. [Window.Increments] lists the live increments.
//
// # Cost
//
// Increments and edges sit in flat slices of small records (one cache line
// per access), with a hand-written binary min-heap of (expiry, Seq, slot)
// items for expiry and a doubly linked list per edge kept in (expiry, Seq)
// order; edges are found through an open-addressing table and linked into
// a list per node. A dropped increment leaves its heap item behind, to be
// discarded when it comes to the top (within one span). Add and an expiry
// cost O(log n) for n heap items (appends at the tail of an edge's list are
// O(1) when times come in order); Remove, Subtract and RemoveNode O(k) for
// the k increments they touch. About 65 bytes per live increment and 70 per
// live edge.
//
// A Window is not safe for concurrent use.
type Window struct {
	span int64 // ms; 0: no window
	wm   int64
	seq  uint64 // last Seq handed out
	obs  func(Increment)

	incs  []incRec // increment slots; a free slot has edge == noIdx
	ifree []uint32
	live  int
	heap  []heapItem // min-heap on (exp, seq); stale items are skipped

	edgeRecs []edgeRec // a free edge has head == noIdx
	efree    []uint32
	edges    int
	nodeHead []uint32 // first half-edge of each node
	isolated []uint32 // nodes that lost their last edge, while collect
	collect  bool     // set inside AppendChanges and AppendExpire

	tab edgeTable
}

// incRec is one increment slot: everything an operation on it reads sits
// in one 40-byte record, so a random access costs one cache miss.
type incRec struct {
	exp        int64
	w          float64
	seq        uint64
	edge       uint32 // noIdx when the slot is free
	next, prev uint32 // the edge's increments, in (exp, seq) order
}

// edgeRec is one edge, u <= v, with its increment list and its two
// half-edges (2e at u, 2e+1 at v) in the per-node lists.
type edgeRec struct {
	u, v, head, tail uint32
	hnext, hprev     [2]uint32
}

// heapItem carries its own key, so sifting touches only the heap. An item
// is stale when its slot was dropped (and maybe reused: the seq differs);
// stale items are discarded when they reach the top. Every item expires
// within one span of its creation, so at most one span's worth of dropped
// increments lingers.
type heapItem struct {
	exp  int64
	seq  uint64
	slot uint32
}

func (a heapItem) less(b heapItem) bool { return a.exp < b.exp || (a.exp == b.exp && a.seq < b.seq) }

// NewWindow returns an empty window of the given span (rounded down to
// whole milliseconds, but at least 1 ms when positive). A span <= 0 means no
// window: nothing expires.
func NewWindow(span time.Duration) *Window {
	s := span.Milliseconds()
	switch {
	case span <= 0:
		s = 0
	case s == 0:
		s = 1
	}
	win := &Window{span: s, wm: math.MinInt64}
	win.tab.init()
	return win
}

// SetObserver makes fn receive every creation, change and drop of an
// increment (see "Persistence"); nil turns reports off. fn must not call
// back into the window.
func (win *Window) SetObserver(fn func(Increment)) { win.obs = fn }

// Span returns the window span; 0 means no window.
func (win *Window) Span() time.Duration { return time.Duration(win.span) * time.Millisecond }

// Watermark returns the largest time passed to Expire, math.MinInt64 if
// none.
func (win *Window) Watermark() int64 { return win.wm }

// Len returns the number of live increments.
func (win *Window) Len() int { return win.live }

// Edges returns the number of edges with at least one live increment.
func (win *Window) Edges() int { return win.edges }

// Weight returns the weight of edge (u, v): the sum of its live increments
// in (expiry, Seq) order; 0 if it has none.
func (win *Window) Weight(u, v uint32) float64 {
	e := win.tab.find(edgeKey(u, v))
	if e == noIdx {
		return 0
	}
	var sum float64
	for s := win.edgeRecs[e].head; s != noIdx; s = win.incs[s].next {
		sum += win.incs[s].w
	}
	return sum
}

// Add adds an increment of weight w (finite, > 0) to edge (u, v) at event
// time ts and reports whether it counts: false when its expiry ts+span is
// at or before the watermark, in which case nothing is stored. It panics on
// a weight that is not finite and positive (decoded events never carry one).
func (win *Window) Add(ts int64, u, v uint32, w float64) bool {
	if !(w > 0) || math.IsInf(w, 1) {
		panic(fmt.Sprintf("ingest: Window.Add: weight %v is not finite and positive", w))
	}
	exp := win.expiry(ts)
	if exp <= win.wm {
		return false
	}
	u, v = order(u, v)
	e := win.edgeOf(u, v)
	if win.span == 0 {
		if s := win.edgeRecs[e].head; s != noIdx {
			win.incs[s].w += w
			win.report(s)
			return true
		}
	}
	win.seq++
	win.report(win.newInc(exp, w, win.seq, e))
	return true
}

// Remove drops every increment of edge (u, v) and returns the weight they
// held and whether there were any.
func (win *Window) Remove(u, v uint32) (float64, bool) {
	e := win.tab.find(edgeKey(u, v))
	if e == noIdx {
		return 0, false
	}
	return win.dropEdge(e), true
}

// Subtract consumes w (> 0) from the increments of edge (u, v), oldest
// expiry first, and returns the weight consumed (at most what the edge held)
// and whether the edge is now gone. See "Semantics" for the residue rule.
func (win *Window) Subtract(u, v uint32, w float64) (consumed float64, gone bool) {
	e := win.tab.find(edgeKey(u, v))
	if e == noIdx || !(w > 0) {
		return 0, false
	}
	var total float64
	for s := win.edgeRecs[e].head; s != noIdx; s = win.incs[s].next {
		total += win.incs[s].w
	}
	if total-w <= residue*total {
		return win.dropEdge(e), true
	}
	rem := w
	for s := win.edgeRecs[e].head; s != noIdx && rem > 0; {
		in := &win.incs[s]
		next := in.next
		if ws := in.w; ws-rem <= residue*ws {
			rem -= ws
			consumed += ws
			if win.drop(s) {
				return consumed, true
			}
		} else {
			in.w = ws - rem
			consumed += rem
			rem = 0
			win.report(s)
		}
		s = next
	}
	return consumed, false
}

// Set drops the increments of edge (u, v) and adds one of weight w at event
// time ts (none if w == 0 or it would already have expired). It returns the
// weight the edge has now (w or 0) and whether it had increments before.
// It panics on a weight that is negative or not finite.
func (win *Window) Set(ts int64, u, v uint32, w float64) (now float64, existed bool) {
	if !(w >= 0) || math.IsInf(w, 1) {
		panic(fmt.Sprintf("ingest: Window.Set: weight %v is not finite and non-negative", w))
	}
	_, existed = win.Remove(u, v)
	if w > 0 && win.Add(ts, u, v, w) {
		return w, existed
	}
	return 0, existed
}

// RemoveNode drops the increments of every edge of node u and returns the
// number of edges dropped.
func (win *Window) RemoveNode(u uint32) int {
	n := 0
	for int(u) < len(win.nodeHead) && win.nodeHead[u] != noIdx {
		win.dropEdge(win.nodeHead[u] >> 1)
		n++
	}
	return n
}

// Expire moves the watermark to watermark if that is later, then pops every
// increment with expiry <= the watermark in (expiry, Seq) order. For each it
// reports the drop to the observer, then calls fn (if not nil) with the
// edge, the weight to subtract and whether the edge has no increment left.
// It returns the number of increments popped.
func (win *Window) Expire(watermark int64, fn func(u, v uint32, w float64, gone bool)) int {
	if watermark > win.wm {
		win.wm = watermark
	}
	n := 0
	for {
		s, ok := win.popDue()
		if !ok {
			return n
		}
		in := &win.incs[s]
		er := &win.edgeRecs[in.edge]
		u, v, w := er.u, er.v, in.w
		gone := win.drop(s)
		n++
		if fn != nil {
			fn(u, v, w, gone)
		}
	}
}

// popDue removes and returns the first live increment with expiry at or
// before the watermark, discarding stale heap items on the way.
func (win *Window) popDue() (uint32, bool) {
	for len(win.heap) > 0 {
		top := win.heap[0]
		if top.exp > win.wm {
			return 0, false
		}
		win.heapPop()
		if in := &win.incs[top.slot]; in.edge != noIdx && in.seq == top.seq {
			return top.slot, true
		}
	}
	return 0, false
}

// Restore puts back a persisted increment, as an observer received it
// (W > 0), without reporting it. Later increments get a Seq above every
// restored one. Restore all increments, then call Expire with the stored
// watermark. Restoring the same increment twice is the caller's error.
func (win *Window) Restore(inc Increment) error {
	if !(inc.W > 0) || math.IsInf(inc.W, 1) || inc.Seq == 0 {
		return fmt.Errorf("%w: expiry %d, seq %d, weight %v", ErrBadIncrement, inc.Expiry, inc.Seq, inc.W)
	}
	u, v := order(inc.U, inc.V)
	win.newInc(inc.Expiry, inc.W, inc.Seq, win.edgeOf(u, v))
	if inc.Seq > win.seq {
		win.seq = inc.Seq
	}
	return nil
}

// Increments appends every live increment to dst[:0] in (expiry, Seq)
// order and returns it.
func (win *Window) Increments(dst []Increment) []Increment {
	dst = dst[:0]
	for s := range win.incs {
		if in := &win.incs[s]; in.edge != noIdx {
			er := &win.edgeRecs[in.edge]
			dst = append(dst, Increment{Expiry: in.exp, U: er.u, V: er.v, W: in.w, Seq: in.seq})
		}
	}
	slices.SortFunc(dst, func(a, b Increment) int {
		if c := cmp.Compare(a.Expiry, b.Expiry); c != 0 {
			return c
		}
		return cmp.Compare(a.Seq, b.Seq)
	})
	return dst
}

// AppendChanges applies one event to the window and appends to dst the
// tracker changes that keep a graph equal to the window, in this order:
//
//  1. the expiry: Expire(ts), each popped increment an OpAdd of -w, or an
//     OpDelete when it was the edge's last;
//  2. the event: add → OpAdd w (w = 1 without hasW) if it counts; remove
//     without hasW → OpDelete if the edge had increments; remove with w →
//     OpAdd of minus what was consumed, or OpDelete when the edge is gone;
//     set → OpSet of the new weight, or OpDelete when that is 0 and the edge
//     existed; node-remove → OpRemoveNode u (always: the node may have no
//     edges and still be in the graph);
//  3. after each OpDelete (and after the OpRemoveNode), an OpRemoveNode for
//     each endpoint (neighbour) left with no edge, so that the tracker holds
//     exactly the nodes that have an edge in the window: a node whose edges
//     have all expired is not counted as a community of one.
//
// ts is the event's time, or the watermark for an event without one. No
// change names an edge that the window does not hold, so a subtraction
// never creates nodes in the tracker.
func (win *Window) AppendChanges(dst []tracker.Change, op Op, ts int64, u, v uint32, w float64, hasW bool) []tracker.Change {
	dst = win.AppendExpire(dst, ts)
	win.collect = true
	switch op {
	case OpAdd:
		if !hasW {
			w = 1
		}
		if win.Add(ts, u, v, w) {
			dst = append(dst, tracker.Change{Op: tracker.OpAdd, U: u, V: v, W: w})
		}
	case OpRemove:
		if !hasW {
			if _, ok := win.Remove(u, v); ok {
				dst = append(dst, tracker.Change{Op: tracker.OpDelete, U: u, V: v})
			}
			break
		}
		c, gone := win.Subtract(u, v, w)
		switch {
		case gone:
			dst = append(dst, tracker.Change{Op: tracker.OpDelete, U: u, V: v})
		case c > 0:
			dst = append(dst, tracker.Change{Op: tracker.OpAdd, U: u, V: v, W: -c})
		}
	case OpSet:
		now, existed := win.Set(ts, u, v, w)
		switch {
		case now > 0:
			dst = append(dst, tracker.Change{Op: tracker.OpSet, U: u, V: v, W: now})
		case existed:
			dst = append(dst, tracker.Change{Op: tracker.OpDelete, U: u, V: v})
		}
	case OpNodeRemove:
		win.RemoveNode(u)
		dst = append(dst, tracker.Change{Op: tracker.OpRemoveNode, U: u})
		dst = win.appendIsolated(dst, u)
	}
	win.collect = false
	return win.appendIsolated(dst, noIdx)
}

// AppendExpire is step 1 of AppendChanges alone (with the OpRemoveNode of
// step 3), for an event that changes no edge but moves the watermark (one
// that names a node the caller has never added).
func (win *Window) AppendExpire(dst []tracker.Change, ts int64) []tracker.Change {
	if ts > win.wm {
		win.wm = ts
	}
	win.collect = true
	for {
		s, ok := win.popDue()
		if !ok {
			break
		}
		in := &win.incs[s]
		er := &win.edgeRecs[in.edge]
		a, b, x := er.u, er.v, in.w
		if win.drop(s) {
			dst = append(dst, tracker.Change{Op: tracker.OpDelete, U: a, V: b})
			dst = win.appendIsolated(dst, noIdx)
		} else {
			dst = append(dst, tracker.Change{Op: tracker.OpAdd, U: a, V: b, W: -x})
		}
	}
	win.collect = false
	return dst
}

func order(u, v uint32) (uint32, uint32) {
	if u > v {
		return v, u
	}
	return u, v
}

func edgeKey(u, v uint32) uint64 {
	u, v = order(u, v)
	return uint64(u)<<32 | uint64(v)
}

func (win *Window) expiry(ts int64) int64 {
	if win.span == 0 || ts > math.MaxInt64-win.span {
		return math.MaxInt64
	}
	return ts + win.span
}

func (win *Window) report(s uint32) {
	if win.obs != nil {
		in := &win.incs[s]
		er := &win.edgeRecs[in.edge]
		win.obs(Increment{Expiry: in.exp, U: er.u, V: er.v, W: in.w, Seq: in.seq})
	}
}

// edgeOf returns the edge (u, v), u <= v, creating it if absent.
func (win *Window) edgeOf(u, v uint32) uint32 {
	k := uint64(u)<<32 | uint64(v)
	if e := win.tab.find(k); e != noIdx {
		return e
	}
	var e uint32
	if n := len(win.efree); n > 0 {
		e = win.efree[n-1]
		win.efree = win.efree[:n-1]
	} else {
		e = uint32(len(win.edgeRecs))
		win.edgeRecs = append(win.edgeRecs, edgeRec{})
	}
	win.edgeRecs[e] = edgeRec{u: u, v: v, head: noIdx, tail: noIdx}
	for int(v) >= len(win.nodeHead) {
		win.nodeHead = append(win.nodeHead, noIdx)
	}
	win.linkHalf(2*e, u)
	win.linkHalf(2*e+1, v)
	win.tab.insert(k, e)
	win.edges++
	return e
}

// half returns the next and prev links of half-edge h.
func (win *Window) half(h uint32) (next, prev *uint32) {
	er := &win.edgeRecs[h>>1]
	return &er.hnext[h&1], &er.hprev[h&1]
}

func (win *Window) linkHalf(h, node uint32) {
	first := win.nodeHead[node]
	next, prev := win.half(h)
	*prev, *next = noIdx, first
	if first != noIdx {
		_, fp := win.half(first)
		*fp = h
	}
	win.nodeHead[node] = h
}

func (win *Window) unlinkHalf(h, node uint32) {
	next, prev := win.half(h)
	p, n := *prev, *next
	if p == noIdx {
		win.nodeHead[node] = n
	} else {
		pn, _ := win.half(p)
		*pn = n
	}
	if n != noIdx {
		_, np := win.half(n)
		*np = p
	}
}

// freeEdge releases an edge that has no increment left and notes the
// endpoints it leaves without an edge.
func (win *Window) freeEdge(e uint32) {
	u, v := win.edgeRecs[e].u, win.edgeRecs[e].v
	win.tab.remove(uint64(u)<<32 | uint64(v))
	win.unlinkHalf(2*e, u)
	win.unlinkHalf(2*e+1, v)
	win.efree = append(win.efree, e)
	win.edges--
	if !win.collect {
		return
	}
	if win.nodeHead[u] == noIdx {
		win.isolated = append(win.isolated, u)
	}
	if v != u && win.nodeHead[v] == noIdx {
		win.isolated = append(win.isolated, v)
	}
}

// appendIsolated appends an OpRemoveNode for every node that lost its last
// edge since the last call (except skip) and clears the list.
func (win *Window) appendIsolated(dst []tracker.Change, skip uint32) []tracker.Change {
	for _, x := range win.isolated {
		// A node can be listed, get an edge back within the same event
		// (Set drops, then adds) and keep it.
		if x != skip && win.nodeHead[x] == noIdx {
			dst = append(dst, tracker.Change{Op: tracker.OpRemoveNode, U: x})
		}
	}
	win.isolated = win.isolated[:0]
	return dst
}

// dropEdge drops every increment of e (which frees it) and returns their
// weight.
func (win *Window) dropEdge(e uint32) float64 {
	var sum float64
	for {
		s := win.edgeRecs[e].head
		sum += win.incs[s].w
		if win.drop(s) {
			return sum
		}
	}
}

// newInc stores an increment in a free slot, links it into its edge's list
// and, in a window, into the heap.
func (win *Window) newInc(exp int64, w float64, seq uint64, e uint32) uint32 {
	var s uint32
	if n := len(win.ifree); n > 0 {
		s = win.ifree[n-1]
		win.ifree = win.ifree[:n-1]
	} else {
		s = uint32(len(win.incs))
		win.incs = append(win.incs, incRec{})
	}
	in := &win.incs[s]
	*in = incRec{exp: exp, w: w, seq: seq, edge: e}
	// Insert after the last increment that sorts before s: O(1) when
	// times come in order.
	er := &win.edgeRecs[e]
	p := er.tail
	for p != noIdx {
		q := &win.incs[p]
		if q.exp < exp || (q.exp == exp && q.seq < seq) {
			break
		}
		p = q.prev
	}
	var n uint32
	if p == noIdx {
		n = er.head
		er.head = s
	} else {
		n = win.incs[p].next
		win.incs[p].next = s
	}
	in.prev, in.next = p, n
	if n == noIdx {
		er.tail = s
	} else {
		win.incs[n].prev = s
	}
	if win.span != 0 {
		win.heapPush(heapItem{exp: exp, seq: seq, slot: s})
	}
	win.live++
	return s
}

// drop removes increment s, reports it gone and frees its edge when it was
// the last one; it returns whether it was. Its heap item, if any, goes
// stale.
func (win *Window) drop(s uint32) bool {
	in := &win.incs[s]
	e := in.edge
	er := &win.edgeRecs[e]
	if win.obs != nil {
		win.obs(Increment{Expiry: in.exp, U: er.u, V: er.v, Seq: in.seq})
	}
	p, n := in.prev, in.next
	if p == noIdx {
		er.head = n
	} else {
		win.incs[p].next = n
	}
	if n == noIdx {
		er.tail = p
	} else {
		win.incs[n].prev = p
	}
	in.edge = noIdx
	win.ifree = append(win.ifree, s)
	win.live--
	if er.head == noIdx {
		win.freeEdge(e)
		return true
	}
	return false
}

func (win *Window) heapPush(it heapItem) {
	h := append(win.heap, it)
	i := len(h) - 1
	for i > 0 {
		p := (i - 1) / 2
		if !it.less(h[p]) {
			break
		}
		h[i] = h[p]
		i = p
	}
	h[i] = it
	win.heap = h
}

func (win *Window) heapPop() {
	h := win.heap
	last := len(h) - 1
	it := h[last]
	h = h[:last]
	win.heap = h
	if last == 0 {
		return
	}
	i, n := 0, last
	for {
		l := 2*i + 1
		if l >= n {
			break
		}
		j := l
		if r := l + 1; r < n && h[r].less(h[l]) {
			j = r
		}
		if !h[j].less(it) {
			break
		}
		h[i] = h[j]
		i = j
	}
	h[i] = it
}

// edgeTable maps an edge key (u<<32 | v) to its edge index: open
// addressing with linear probing over 16-byte slots (key and value side by
// side, one cache line touched per probe run), kept at most half full (at
// 3/4 the probe runs of misses and deletions grow about four times as
// long), deletion by backward shift (no tombstones).
type edgeTable struct {
	slots []tableSlot
	n     int
	shift uint
}

type tableSlot struct {
	key uint64
	val uint32 // edge index + 1; 0 marks an empty slot
}

func (t *edgeTable) init() {
	t.slots = make([]tableSlot, 16)
	t.shift = 64 - 4
	t.n = 0
}

func (t *edgeTable) home(k uint64) uint64 { return (k * 0x9E3779B97F4A7C15) >> t.shift }

func (t *edgeTable) find(k uint64) uint32 {
	mask := uint64(len(t.slots) - 1)
	for i := t.home(k); ; i = (i + 1) & mask {
		sl := &t.slots[i]
		if sl.val == 0 {
			return noIdx
		}
		if sl.key == k {
			return sl.val - 1
		}
	}
}

// insert adds k, which must be absent.
func (t *edgeTable) insert(k uint64, e uint32) {
	if 2*(t.n+1) > len(t.slots) {
		t.grow()
	}
	mask := uint64(len(t.slots) - 1)
	i := t.home(k)
	for t.slots[i].val != 0 {
		i = (i + 1) & mask
	}
	t.slots[i] = tableSlot{k, e + 1}
	t.n++
}

func (t *edgeTable) grow() {
	old := t.slots
	t.slots = make([]tableSlot, 2*len(old))
	t.shift--
	t.n = 0
	for _, sl := range old {
		if sl.val != 0 {
			t.insert(sl.key, sl.val-1)
		}
	}
}

// remove deletes k, which must be present.
func (t *edgeTable) remove(k uint64) {
	mask := uint64(len(t.slots) - 1)
	i := t.home(k)
	for t.slots[i].key != k || t.slots[i].val == 0 {
		i = (i + 1) & mask
	}
	// Backward shift: pull later entries of the probe run into the hole
	// when their home slot does not lie between the hole and them.
	for j := (i + 1) & mask; t.slots[j].val != 0; j = (j + 1) & mask {
		if (j-t.home(t.slots[j].key))&mask >= (j-i)&mask {
			t.slots[i] = t.slots[j]
			i = j
		}
	}
	t.slots[i].val = 0
	t.n--
}
