package ingest

import (
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
	// keys the increment in the store (family 'x', DESIGN.md section 4).
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

// Window is the sliding window of edge increments of DESIGN.md section 3,
// in memory.
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
// Increments sit in flat per-slot slices, with a hand-written binary
// min-heap on (expiry, Seq) for expiry and a doubly linked list per edge
// kept in (expiry, Seq) order; edges are found through an open-addressing
// table and linked into a list per node. Add, a partial Subtract and an
// expiry cost O(log n) for n live increments (appends at the tail of an
// edge's list are O(1) when times come in order); Remove and RemoveNode are
// O(k log n) for the k increments dropped. About 50 bytes per live
// increment and 40 per live edge.
//
// A Window is not safe for concurrent use.
type Window struct {
	span int64 // ms; 0: no window
	wm   int64
	seq  uint64 // last Seq handed out
	obs  func(Increment)

	// Increment slots. A free slot has edge[s] == noIdx.
	exp          []int64
	w            []float64
	sq           []uint64
	edge         []uint32
	inext, iprev []uint32 // list of the edge's increments, (expiry, Seq) order
	hpos         []int32  // position in heap; -1 if not there
	ifree        []uint32
	live         int

	heap []uint32 // slots, min-heap on (exp, sq)

	// Edges. A free edge has ehead[e] == noIdx.
	eu, ev       []uint32
	ehead, etail []uint32
	hnext, hprev []uint32 // half-edges: 2e at eu[e], 2e+1 at ev[e]
	efree        []uint32
	edges        int
	nodeHead     []uint32 // first half-edge of each node
	isolated     []uint32 // nodes that lost their last edge, while collect
	collect      bool     // set inside AppendChanges and AppendExpire

	tab edgeTable
}

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
	for s := win.ehead[e]; s != noIdx; s = win.inext[s] {
		sum += win.w[s]
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
	if win.span == 0 && win.ehead[e] != noIdx {
		s := win.ehead[e]
		win.w[s] += w
		win.report(s)
		return true
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
	for s := win.ehead[e]; s != noIdx; s = win.inext[s] {
		total += win.w[s]
	}
	if total-w <= residue*total {
		return win.dropEdge(e), true
	}
	rem := w
	for s := win.ehead[e]; s != noIdx && rem > 0; {
		next := win.inext[s]
		if ws := win.w[s]; ws-rem <= residue*ws {
			rem -= ws
			consumed += ws
			if win.drop(s) {
				return consumed, true
			}
		} else {
			win.w[s] = ws - rem
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
	for len(win.heap) > 0 {
		s := win.heap[0]
		if win.exp[s] > win.wm {
			break
		}
		e := win.edge[s]
		u, v, w := win.eu[e], win.ev[e], win.w[s]
		gone := win.drop(s)
		n++
		if fn != nil {
			fn(u, v, w, gone)
		}
	}
	return n
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
	for s, e := range win.edge {
		if e != noIdx {
			dst = append(dst, Increment{Expiry: win.exp[s], U: win.eu[e], V: win.ev[e], W: win.w[s], Seq: win.sq[s]})
		}
	}
	slices.SortFunc(dst, func(a, b Increment) int {
		if a.Expiry != b.Expiry {
			if a.Expiry < b.Expiry {
				return -1
			}
			return 1
		}
		if a.Seq < b.Seq {
			return -1
		}
		if a.Seq > b.Seq {
			return 1
		}
		return 0
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
	for len(win.heap) > 0 {
		s := win.heap[0]
		if win.exp[s] > win.wm {
			break
		}
		e := win.edge[s]
		a, b, x := win.eu[e], win.ev[e], win.w[s]
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
		e := win.edge[s]
		win.obs(Increment{Expiry: win.exp[s], U: win.eu[e], V: win.ev[e], W: win.w[s], Seq: win.sq[s]})
	}
}

// less orders increment slots by (expiry, Seq).
func (win *Window) less(a, b uint32) bool {
	ea, eb := win.exp[a], win.exp[b]
	return ea < eb || (ea == eb && win.sq[a] < win.sq[b])
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
		win.eu[e], win.ev[e] = u, v
	} else {
		e = uint32(len(win.eu))
		win.eu = append(win.eu, u)
		win.ev = append(win.ev, v)
		win.ehead = append(win.ehead, noIdx)
		win.etail = append(win.etail, noIdx)
		win.hnext = append(win.hnext, noIdx, noIdx)
		win.hprev = append(win.hprev, noIdx, noIdx)
	}
	win.ehead[e], win.etail[e] = noIdx, noIdx
	for int(v) >= len(win.nodeHead) {
		win.nodeHead = append(win.nodeHead, noIdx)
	}
	win.linkHalf(2*e, u)
	win.linkHalf(2*e+1, v)
	win.tab.insert(k, e)
	win.edges++
	return e
}

func (win *Window) linkHalf(h, node uint32) {
	first := win.nodeHead[node]
	win.hprev[h], win.hnext[h] = noIdx, first
	if first != noIdx {
		win.hprev[first] = h
	}
	win.nodeHead[node] = h
}

func (win *Window) unlinkHalf(h, node uint32) {
	p, n := win.hprev[h], win.hnext[h]
	if p == noIdx {
		win.nodeHead[node] = n
	} else {
		win.hnext[p] = n
	}
	if n != noIdx {
		win.hprev[n] = p
	}
}

// freeEdge releases an edge that has no increment left and notes the
// endpoints it leaves without an edge.
func (win *Window) freeEdge(e uint32) {
	u, v := win.eu[e], win.ev[e]
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
		s := win.ehead[e]
		sum += win.w[s]
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
		win.exp[s], win.w[s], win.sq[s], win.edge[s] = exp, w, seq, e
	} else {
		s = uint32(len(win.exp))
		win.exp = append(win.exp, exp)
		win.w = append(win.w, w)
		win.sq = append(win.sq, seq)
		win.edge = append(win.edge, e)
		win.inext = append(win.inext, noIdx)
		win.iprev = append(win.iprev, noIdx)
		win.hpos = append(win.hpos, -1)
	}
	// Insert after the last increment that sorts before s: O(1) when
	// times come in order.
	p := win.etail[e]
	for p != noIdx && win.less(s, p) {
		p = win.iprev[p]
	}
	var n uint32
	if p == noIdx {
		n = win.ehead[e]
		win.ehead[e] = s
	} else {
		n = win.inext[p]
		win.inext[p] = s
	}
	win.iprev[s], win.inext[s] = p, n
	if n == noIdx {
		win.etail[e] = s
	} else {
		win.iprev[n] = s
	}
	win.hpos[s] = -1
	if win.span != 0 {
		win.heapPush(s)
	}
	win.live++
	return s
}

// drop removes increment s, reports it gone and frees its edge when it was
// the last one; it returns whether it was.
func (win *Window) drop(s uint32) bool {
	e := win.edge[s]
	if win.obs != nil {
		win.obs(Increment{Expiry: win.exp[s], U: win.eu[e], V: win.ev[e], Seq: win.sq[s]})
	}
	p, n := win.iprev[s], win.inext[s]
	if p == noIdx {
		win.ehead[e] = n
	} else {
		win.inext[p] = n
	}
	if n == noIdx {
		win.etail[e] = p
	} else {
		win.iprev[n] = p
	}
	if win.hpos[s] >= 0 {
		win.heapRemove(s)
	}
	win.edge[s] = noIdx
	win.ifree = append(win.ifree, s)
	win.live--
	if win.ehead[e] == noIdx {
		win.freeEdge(e)
		return true
	}
	return false
}

func (win *Window) heapPush(s uint32) {
	i := len(win.heap)
	win.heap = append(win.heap, s)
	win.hpos[s] = int32(i)
	win.up(i)
}

func (win *Window) heapRemove(s uint32) {
	i := int(win.hpos[s])
	last := len(win.heap) - 1
	if i != last {
		win.swap(i, last)
	}
	win.heap = win.heap[:last]
	win.hpos[s] = -1
	if i != last && !win.down(i) {
		win.up(i)
	}
}

func (win *Window) swap(i, j int) {
	h := win.heap
	h[i], h[j] = h[j], h[i]
	win.hpos[h[i]] = int32(i)
	win.hpos[h[j]] = int32(j)
}

func (win *Window) up(i int) {
	for i > 0 {
		p := (i - 1) / 2
		if !win.less(win.heap[i], win.heap[p]) {
			return
		}
		win.swap(i, p)
		i = p
	}
}

// down sifts heap[i] down and reports whether it moved.
func (win *Window) down(i int) bool {
	i0, n := i, len(win.heap)
	for {
		l := 2*i + 1
		if l >= n {
			break
		}
		j := l
		if r := l + 1; r < n && win.less(win.heap[r], win.heap[l]) {
			j = r
		}
		if !win.less(win.heap[j], win.heap[i]) {
			break
		}
		win.swap(i, j)
		i = j
	}
	return i > i0
}

// edgeTable maps an edge key (u<<32 | v) to its edge index: open
// addressing with linear probing, kept at most 3/4 full, deletion by
// backward shift (no tombstones).
type edgeTable struct {
	keys  []uint64
	vals  []uint32 // edge index + 1; 0 marks an empty slot
	n     int
	shift uint
}

func (t *edgeTable) init() {
	t.keys = make([]uint64, 16)
	t.vals = make([]uint32, 16)
	t.shift = 64 - 4
	t.n = 0
}

func (t *edgeTable) home(k uint64) uint64 { return (k * 0x9E3779B97F4A7C15) >> t.shift }

func (t *edgeTable) find(k uint64) uint32 {
	mask := uint64(len(t.keys) - 1)
	for i := t.home(k); ; i = (i + 1) & mask {
		if t.vals[i] == 0 {
			return noIdx
		}
		if t.keys[i] == k {
			return t.vals[i] - 1
		}
	}
}

// insert adds k, which must be absent.
func (t *edgeTable) insert(k uint64, e uint32) {
	if 4*(t.n+1) > 3*len(t.keys) {
		t.grow()
	}
	mask := uint64(len(t.keys) - 1)
	i := t.home(k)
	for t.vals[i] != 0 {
		i = (i + 1) & mask
	}
	t.keys[i], t.vals[i] = k, e+1
	t.n++
}

func (t *edgeTable) grow() {
	keys, vals := t.keys, t.vals
	t.keys = make([]uint64, 2*len(keys))
	t.vals = make([]uint32, 2*len(vals))
	t.shift--
	t.n = 0
	for i, v := range vals {
		if v != 0 {
			t.insert(keys[i], v-1)
		}
	}
}

// remove deletes k, which must be present.
func (t *edgeTable) remove(k uint64) {
	mask := uint64(len(t.keys) - 1)
	i := t.home(k)
	for t.keys[i] != k || t.vals[i] == 0 {
		i = (i + 1) & mask
	}
	// Backward shift: pull later entries of the probe run into the hole
	// when their home slot does not lie between the hole and them.
	for j := (i + 1) & mask; t.vals[j] != 0; j = (j + 1) & mask {
		if (j-t.home(t.keys[j]))&mask >= (j-i)&mask {
			t.keys[i], t.vals[i] = t.keys[j], t.vals[j]
			i = j
		}
	}
	t.vals[i] = 0
	t.n--
}
