package ingest

import (
	"math"
	"math/rand/v2"
	"slices"
	"testing"
	"time"

	"shoal/tracker"
)

// The expected values in these tests are hand calculations from the window
// semantics of doc.go (Sliding window: the weight of an edge is exactly
// the sum of its increments that have not expired; expiry is driven by the
// event-time watermark), as the Window doc spells them out.

type expired struct {
	u, v uint32
	w    float64
	gone bool
}

func expireAll(win *Window, wm int64) []expired {
	var out []expired
	win.Expire(wm, func(u, v uint32, w float64, gone bool) { out = append(out, expired{u, v, w, gone}) })
	return out
}

func TestWindowAddAndExpire(t *testing.T) {
	win := NewWindow(10 * time.Millisecond)
	if win.Watermark() != math.MinInt64 {
		t.Fatalf("watermark before any Expire = %d", win.Watermark())
	}
	// Three adds on 1-2 at ts 0, 5, 5 and one on 3-4 at ts 2: expiries 10,
	// 15, 15, 12.
	for _, a := range []struct {
		ts   int64
		u, v uint32
		w    float64
	}{{0, 1, 2, 1}, {5, 2, 1, 2}, {5, 1, 2, 4}, {2, 4, 3, 8}} {
		if !win.Add(a.ts, a.u, a.v, a.w) {
			t.Fatalf("add at %d refused with no watermark yet", a.ts)
		}
	}
	if got := win.Weight(2, 1); got != 7 {
		t.Fatalf("weight 1-2 = %v, want 1+2+4 = 7", got)
	}
	if win.Len() != 4 || win.Edges() != 2 {
		t.Fatalf("Len %d Edges %d, want 4 and 2", win.Len(), win.Edges())
	}
	// At watermark 9 nothing has expired (expiry is after the watermark).
	if got := expireAll(win, 9); len(got) != 0 {
		t.Fatalf("expired at 9: %v", got)
	}
	// At 12: the ts-0 increment of 1-2 (expiry 10), then 3-4 (expiry 12,
	// its last: gone), in expiry order.
	want := []expired{{1, 2, 1, false}, {3, 4, 8, true}}
	if got := expireAll(win, 12); !slices.Equal(got, want) {
		t.Fatalf("expired at 12: %v, want %v", got, want)
	}
	if got := win.Weight(1, 2); got != 6 {
		t.Fatalf("weight 1-2 after expiry = %v, want 6", got)
	}
	// The watermark never moves back; a late add whose expiry is at or
	// before it is not stored.
	win.Expire(3, nil)
	if win.Watermark() != 12 {
		t.Fatalf("watermark moved back to %d", win.Watermark())
	}
	if win.Add(2, 1, 2, 100) {
		t.Fatal("add at ts 2 (expiry 12 <= watermark 12) was stored")
	}
	if !win.Add(3, 1, 2, 16) { // expiry 13 > 12
		t.Fatal("add at ts 3 (expiry 13) refused")
	}
	// The two ts-5 increments share expiry 15 and go in Seq order (2 then
	// 4); the late one (expiry 13) goes first.
	want = []expired{{1, 2, 16, false}, {1, 2, 2, false}, {1, 2, 4, true}}
	if got := expireAll(win, 15); !slices.Equal(got, want) {
		t.Fatalf("expired at 15: %v, want %v", got, want)
	}
	if win.Len() != 0 || win.Edges() != 0 || win.Weight(1, 2) != 0 {
		t.Fatalf("window not empty: Len %d Edges %d", win.Len(), win.Edges())
	}
}

func TestWindowRemove(t *testing.T) {
	win := NewWindow(time.Hour)
	win.Add(0, 1, 2, 1.5)
	win.Add(1, 2, 1, 2.5)
	win.Add(1, 1, 3, 1)
	if w, ok := win.Remove(2, 1); !ok || w != 4 {
		t.Fatalf("Remove = %v, %v; want 4, true", w, ok)
	}
	if w, ok := win.Remove(1, 2); ok || w != 0 {
		t.Fatalf("second Remove = %v, %v; want 0, false", w, ok)
	}
	if win.Weight(1, 3) != 1 || win.Len() != 1 || win.Edges() != 1 {
		t.Fatal("Remove touched another edge")
	}
	// Nothing of the removed edge is left to expire.
	if got := expireAll(win, math.MaxInt64); !slices.Equal(got, []expired{{1, 3, 1, true}}) {
		t.Fatalf("expired %v", got)
	}
}

func TestWindowSubtractOldestFirst(t *testing.T) {
	win := NewWindow(100 * time.Millisecond)
	win.Add(20, 1, 2, 3) // expiry 120
	win.Add(0, 1, 2, 2)  // expiry 100: the oldest, though added second
	win.Add(30, 1, 2, 5) // expiry 130
	// Subtract 4: the expiry-100 increment (2) goes whole, 2 of the
	// expiry-120 one (3) are consumed, leaving 1 + 5.
	if c, gone := win.Subtract(1, 2, 4); c != 4 || gone {
		t.Fatalf("Subtract = %v, %v; want 4, false", c, gone)
	}
	if win.Weight(1, 2) != 6 || win.Len() != 2 {
		t.Fatalf("weight %v, %d increments; want 6 and 2", win.Weight(1, 2), win.Len())
	}
	want := []expired{{1, 2, 1, false}}
	if got := expireAll(win, 120); !slices.Equal(got, want) {
		t.Fatalf("expired at 120: %v, want %v", got, want)
	}
	// Subtracting more than the edge holds consumes what it holds.
	if c, gone := win.Subtract(2, 1, 50); c != 5 || !gone {
		t.Fatalf("Subtract 50 of 5 = %v, %v; want 5, true", c, gone)
	}
	if c, gone := win.Subtract(1, 2, 1); c != 0 || gone {
		t.Fatalf("Subtract on absent edge = %v, %v", c, gone)
	}
	// Rounding residue: 0.1 + 0.2 - 0.3 is 5.6e-17, not a live edge (the
	// rule of Load, 1e-12 of the weight).
	win.Add(200, 3, 4, 0.1)
	win.Add(200, 3, 4, 0.2)
	if _, gone := win.Subtract(3, 4, 0.3); !gone || win.Edges() != 0 {
		t.Fatalf("0.1+0.2-0.3 left an edge: gone %v, edges %d", gone, win.Edges())
	}
}

func TestWindowSet(t *testing.T) {
	win := NewWindow(10 * time.Millisecond)
	win.Add(0, 1, 2, 1)
	win.Add(1, 1, 2, 1)
	if now, existed := win.Set(5, 2, 1, 7); now != 7 || !existed {
		t.Fatalf("Set = %v, %v", now, existed)
	}
	if win.Weight(1, 2) != 7 || win.Len() != 1 {
		t.Fatalf("after set: weight %v, %d increments; want 7 and 1", win.Weight(1, 2), win.Len())
	}
	// The set's increment expires at 15, not with the old adds (10, 11).
	if got := expireAll(win, 11); len(got) != 0 {
		t.Fatalf("old increments survived the set: %v", got)
	}
	if now, existed := win.Set(12, 1, 2, 0); now != 0 || !existed || win.Edges() != 0 {
		t.Fatalf("Set 0 = %v, %v, edges %d", now, existed, win.Edges())
	}
	if now, existed := win.Set(12, 1, 2, 0); now != 0 || existed {
		t.Fatalf("Set 0 on absent edge = %v, %v", now, existed)
	}
	// A set that would already have expired leaves the edge empty.
	win.Expire(100, nil)
	win.Add(95, 1, 2, 1)
	if now, existed := win.Set(80, 1, 2, 3); now != 0 || !existed || win.Edges() != 0 {
		t.Fatalf("late Set = %v, %v, edges %d", now, existed, win.Edges())
	}
}

func TestWindowRemoveNode(t *testing.T) {
	win := NewWindow(time.Hour)
	// A star on 0 with a self-loop, a double increment, and one edge apart.
	win.Add(0, 0, 1, 1)
	win.Add(0, 2, 0, 1)
	win.Add(1, 0, 2, 1)
	win.Add(0, 0, 0, 1)
	win.Add(0, 3, 4, 1)
	if n := win.RemoveNode(0); n != 3 {
		t.Fatalf("RemoveNode dropped %d edges, want 3 (0-1, 0-2, 0-0)", n)
	}
	if win.Edges() != 1 || win.Len() != 1 || win.Weight(3, 4) != 1 {
		t.Fatalf("edges %d, increments %d after RemoveNode", win.Edges(), win.Len())
	}
	if n := win.RemoveNode(0); n != 0 {
		t.Fatalf("second RemoveNode dropped %d", n)
	}
	if n := win.RemoveNode(1000); n != 0 {
		t.Fatalf("RemoveNode of an unknown id dropped %d", n)
	}
	// Edges of the node can come back.
	win.Add(2, 0, 1, 2)
	if win.Weight(1, 0) != 2 {
		t.Fatal("edge did not come back after RemoveNode")
	}
}

func TestWindowNoSpan(t *testing.T) {
	win := NewWindow(0)
	var seen []Increment
	win.SetObserver(func(inc Increment) { seen = append(seen, inc) })
	win.Add(0, 1, 2, 1)
	win.Add(1<<40, 2, 1, 2)
	if win.Len() != 1 || win.Weight(1, 2) != 3 {
		t.Fatalf("without a window adds fold into one increment: Len %d weight %v", win.Len(), win.Weight(1, 2))
	}
	if n := win.Expire(math.MaxInt64-1, nil); n != 0 {
		t.Fatalf("%d increments expired without a window", n)
	}
	want := []Increment{{math.MaxInt64, 1, 2, 1, 1}, {math.MaxInt64, 1, 2, 3, 1}}
	if !slices.Equal(seen, want) {
		t.Fatalf("observer saw %v, want %v", seen, want)
	}
}

// refWindow is the brute-force fold: a plain list of increments, every
// operation a scan of it, the weight of an edge the sum over the list of
// its increments in (expiry, Seq) order.
type refWindow struct {
	span int64
	wm   int64
	seq  uint64
	incs []Increment
}

func (r *refWindow) edge(u, v uint32) []int {
	u, v = order(u, v)
	var idx []int
	for i, x := range r.incs {
		if x.U == u && x.V == v {
			idx = append(idx, i)
		}
	}
	slices.SortFunc(idx, func(a, b int) int { return cmpInc(r.incs[a], r.incs[b]) })
	return idx
}

func cmpInc(a, b Increment) int {
	switch {
	case a.Expiry != b.Expiry:
		if a.Expiry < b.Expiry {
			return -1
		}
		return 1
	case a.Seq < b.Seq:
		return -1
	case a.Seq > b.Seq:
		return 1
	}
	return 0
}

func (r *refWindow) weight(u, v uint32) float64 {
	var s float64
	for _, i := range r.edge(u, v) {
		s += r.incs[i].W
	}
	return s
}

func (r *refWindow) del(keep func(Increment) bool) {
	r.incs = slices.DeleteFunc(r.incs, func(x Increment) bool { return !keep(x) })
}

func (r *refWindow) add(ts int64, u, v uint32, w float64) bool {
	exp := ts + r.span
	if exp <= r.wm {
		return false
	}
	u, v = order(u, v)
	r.seq++
	r.incs = append(r.incs, Increment{exp, u, v, w, r.seq})
	return true
}

func (r *refWindow) remove(u, v uint32) bool {
	u, v = order(u, v)
	n := len(r.incs)
	r.del(func(x Increment) bool { return x.U != u || x.V != v })
	return len(r.incs) < n
}

func (r *refWindow) subtract(u, v uint32, w float64) (float64, bool) {
	total := r.weight(u, v)
	if total == 0 {
		return 0, false
	}
	if total-w <= residue*total {
		r.remove(u, v)
		return total, true
	}
	rem, c := w, 0.0
	for _, i := range r.edge(u, v) {
		if rem <= 0 {
			break
		}
		if ws := r.incs[i].W; ws-rem <= residue*ws {
			rem -= ws
			c += ws
			r.incs[i].W = 0
		} else {
			r.incs[i].W = ws - rem
			c += rem
			rem = 0
		}
	}
	r.del(func(x Increment) bool { return x.W != 0 })
	return c, r.weight(u, v) == 0
}

func (r *refWindow) expire(wm int64) []expired {
	r.wm = max(r.wm, wm)
	var out []Increment
	for _, x := range r.incs {
		if x.Expiry <= r.wm {
			out = append(out, x)
		}
	}
	slices.SortFunc(out, cmpInc)
	var res []expired
	for _, x := range out {
		r.del(func(y Increment) bool { return y.Seq != x.Seq })
		res = append(res, expired{x.U, x.V, x.W, len(r.edge(x.U, x.V)) == 0})
	}
	return res
}

// TestWindowMatchesBruteForce runs random streams of every op against the
// brute-force fold and compares every edge weight, every expiry report and
// every return value after each op. Times mostly advance, sometimes jump
// back (late events), so late adds and out-of-order expiries in one edge's
// list are exercised; up to 64 nodes, so the edge table grows, and
// deletions shift probe runs back.
func TestWindowMatchesBruteForce(t *testing.T) {
	for seed := uint64(1); seed <= 20; seed++ {
		rng := rand.New(rand.NewPCG(seed, 99))
		const span = 50
		win := NewWindow(span * time.Millisecond)
		ref := &refWindow{span: span, wm: math.MinInt64}
		nodes := 4 + rng.IntN(60)
		node := func() uint32 { return uint32(rng.IntN(nodes)) }
		ts := int64(1000)
		for step := 0; step < 1500; step++ {
			ts += int64(rng.IntN(4))
			at := ts
			if rng.IntN(8) == 0 {
				at = ts - int64(rng.IntN(2*span)) // late
			}
			u, v := node(), node()
			w := float64(1+rng.IntN(8)) / 4
			switch k := rng.IntN(20); {
			case k < 10:
				if got, want := win.Add(at, u, v, w), ref.add(at, u, v, w); got != want {
					t.Fatalf("seed %d step %d: Add = %v, want %v", seed, step, got, want)
				}
			case k < 12:
				if _, got := win.Remove(u, v); got != ref.remove(u, v) {
					t.Fatalf("seed %d step %d: Remove = %v", seed, step, got)
				}
			case k < 15:
				gc, gg := win.Subtract(u, v, 2*w)
				wc, wg := ref.subtract(u, v, 2*w)
				if gc != wc || gg != wg {
					t.Fatalf("seed %d step %d: Subtract = %v %v, want %v %v", seed, step, gc, gg, wc, wg)
				}
			case k < 16:
				ww := w
				if rng.IntN(3) == 0 {
					ww = 0
				}
				existed := ref.remove(u, v)
				now := 0.0
				if ww > 0 && ref.add(at, u, v, ww) {
					now = ww
				}
				gn, ge := win.Set(at, u, v, ww)
				if gn != now || ge != existed {
					t.Fatalf("seed %d step %d: Set = %v %v, want %v %v", seed, step, gn, ge, now, existed)
				}
			case k < 17:
				win.RemoveNode(u)
				ref.del(func(x Increment) bool { return x.U != u && x.V != u })
			default:
				got, want := expireAll(win, ts), ref.expire(ts)
				if !slices.Equal(got, want) {
					t.Fatalf("seed %d step %d: Expire(%d) = %v, want %v", seed, step, ts, got, want)
				}
			}
			if win.Len() != len(ref.incs) {
				t.Fatalf("seed %d step %d: Len %d, want %d", seed, step, win.Len(), len(ref.incs))
			}
			if step%25 == 0 {
				edges := 0
				for a := 0; a < nodes; a++ {
					for b := a; b < nodes; b++ {
						want := ref.weight(uint32(a), uint32(b))
						if want > 0 {
							edges++
						}
						if got := win.Weight(uint32(b), uint32(a)); got != want {
							t.Fatalf("seed %d step %d: weight %d-%d = %v, want %v", seed, step, a, b, got, want)
						}
					}
				}
				if win.Edges() != edges {
					t.Fatalf("seed %d step %d: Edges %d, want %d", seed, step, win.Edges(), edges)
				}
				gi := win.Increments(nil)
				wi := slices.Clone(ref.incs)
				slices.SortFunc(wi, cmpInc)
				if !slices.Equal(gi, wi) {
					t.Fatalf("seed %d step %d: Increments differ", seed, step)
				}
			}
		}
	}
}

// windowScript drives a window through AppendChanges with a seeded random
// stream of all four ops, times advancing with some late events.
type windowScript struct {
	src   *rand.PCG
	rng   *rand.Rand
	ts    int64
	nodes int
}

func newScript(seed1, seed2 uint64, nodes int) *windowScript {
	src := rand.NewPCG(seed1, seed2)
	return &windowScript{src: src, rng: rand.New(src), nodes: nodes}
}

// clone returns an independent copy that will produce the same stream.
func (s *windowScript) clone() *windowScript {
	src := *s.src
	return &windowScript{src: &src, rng: rand.New(&src), ts: s.ts, nodes: s.nodes}
}

func (s *windowScript) step(win *Window, dst []tracker.Change) []tracker.Change {
	s.ts += int64(s.rng.IntN(3))
	at := s.ts
	if s.rng.IntN(10) == 0 {
		at -= int64(s.rng.IntN(40))
	}
	u, v := uint32(s.rng.IntN(s.nodes)), uint32(s.rng.IntN(s.nodes))
	w := float64(1 + s.rng.IntN(5))
	switch k := s.rng.IntN(20); {
	case k < 13:
		return win.AppendChanges(dst, OpAdd, at, u, v, w, s.rng.IntN(2) == 0)
	case k < 15:
		return win.AppendChanges(dst, OpRemove, at, u, v, 0, false)
	case k < 17:
		return win.AppendChanges(dst, OpRemove, at, u, v, w, true)
	case k < 19:
		return win.AppendChanges(dst, OpSet, at, u, v, float64(s.rng.IntN(3)), true)
	default:
		return win.AppendChanges(dst, OpNodeRemove, at, u, 0, 0, false)
	}
}

// TestWindowObserverRestore: a store that applies the observer's reports
// (put on W > 0, delete on W == 0) holds exactly the live increments at any
// point; a window restored from it at a random point, with the watermark
// put back by Expire, then produces the same changes as the original for
// the rest of the stream, and the same weights.
func TestWindowObserverRestore(t *testing.T) {
	for seed := uint64(1); seed <= 10; seed++ {
		win := NewWindow(30 * time.Millisecond)
		store := map[uint64]Increment{} // keyed by Seq, which is unique
		win.SetObserver(func(inc Increment) {
			if inc.W == 0 {
				if _, ok := store[inc.Seq]; !ok {
					t.Fatalf("drop of seq %d that was never stored", inc.Seq)
				}
				delete(store, inc.Seq)
				return
			}
			store[inc.Seq] = inc
		})
		s := newScript(seed, 7, 30)
		cut := 200 + int(seed)*37
		var buf []tracker.Change
		for i := 0; i < cut; i++ {
			buf = s.step(win, buf[:0])
		}
		live := win.Increments(nil)
		var stored []Increment
		for _, inc := range store {
			stored = append(stored, inc)
		}
		slices.SortFunc(stored, cmpInc)
		if !slices.Equal(live, stored) {
			t.Fatalf("seed %d: store holds %d increments, window %d, or they differ", seed, len(stored), len(live))
		}
		// Restore in shuffled order: the lists must sort themselves.
		rest := NewWindow(30 * time.Millisecond)
		rand.New(rand.NewPCG(seed, 8)).Shuffle(len(stored), func(i, j int) { stored[i], stored[j] = stored[j], stored[i] })
		for _, inc := range stored {
			if err := rest.Restore(inc); err != nil {
				t.Fatal(err)
			}
		}
		if n := rest.Expire(win.Watermark(), nil); n != 0 {
			t.Fatalf("seed %d: %d restored increments had expired", seed, n)
		}
		win.SetObserver(nil)
		// Both go on with the same stream (two copies of the generator).
		s2 := s.clone()
		var a, b []tracker.Change
		for i := 0; i < 500; i++ {
			a = s.step(win, a[:0])
			b = s2.step(rest, b[:0])
			if !slices.Equal(a, b) {
				t.Fatalf("seed %d step %d after restore: changes %v, want %v", seed, i, b, a)
			}
		}
		if !slices.Equal(win.Increments(nil), rest.Increments(nil)) {
			t.Fatalf("seed %d: windows differ at the end", seed)
		}
	}
	if err := NewWindow(time.Second).Restore(Increment{Expiry: 5, U: 1, V: 2, W: math.NaN(), Seq: 1}); err == nil {
		t.Fatal("Restore accepted a NaN weight")
	}
	if err := NewWindow(time.Second).Restore(Increment{Expiry: 5, U: 1, V: 2, W: 1}); err == nil {
		t.Fatal("Restore accepted Seq 0")
	}
}

// TestWindowAppendChangesKeepTrackerEqual: the changes AppendChanges
// returns, applied to the real tracker in batches, leave its graph with the
// window's edges and weights and exactly the nodes that have an edge in the
// window (a subtraction of an absent edge must not create nodes, a node
// whose edges all went must go). The tracker's own invariant checker runs
// after every batch.
func TestWindowAppendChangesKeepTrackerEqual(t *testing.T) {
	for _, span := range []time.Duration{0, 20 * time.Millisecond} {
		win := NewWindow(span)
		tr, err := tracker.New(&tracker.Options{Seed: 1})
		if err != nil {
			t.Fatal(err)
		}
		s := newScript(3, uint64(span), 40)
		var batch []tracker.Change
		for i := 1; i <= 3000; i++ {
			batch = s.step(win, batch)
			if i%50 != 0 {
				continue
			}
			if _, err := tr.Apply(batch); err != nil {
				t.Fatal(err)
			}
			batch = batch[:0]
			if err := tr.Check(); err != nil {
				t.Fatalf("span %v after %d events: %v", span, i, err)
			}
			g := tr.Graph()
			withEdge := 0
			for a := 0; a < s.nodes; a++ {
				has := false
				for b := 0; b < s.nodes; b++ {
					ww, gw := win.Weight(uint32(a), uint32(b)), 0.0
					if a < g.Len() && b < g.Len() {
						gw = g.Weight(uint32(a), uint32(b))
					}
					if math.Abs(ww-gw) > 1e-9*max(1, ww) {
						t.Fatalf("span %v after %d events: weight %d-%d window %v, tracker %v", span, i, a, b, ww, gw)
					}
					has = has || ww > 0
				}
				if has {
					withEdge++
				}
				if present := a < g.Len() && g.Has(uint32(a)); present != has {
					t.Fatalf("span %v after %d events: node %d present %v, has a window edge %v", span, i, a, present, has)
				}
			}
			if g.Nodes() != withEdge {
				t.Fatalf("span %v after %d events: tracker has %d nodes, %d have window edges", span, i, g.Nodes(), withEdge)
			}
			if g.Edges() != win.Edges() {
				t.Fatalf("span %v after %d events: tracker has %d edges, window %d", span, i, g.Edges(), win.Edges())
			}
		}
	}
}

// TestWindowAppendChanges pins the change list of each op (hand-written
// from the AppendChanges doc), including the cases that must produce no
// change at all, so that the tracker never sees an edge the window lacks.
func TestWindowAppendChanges(t *testing.T) {
	type C = tracker.Change
	win := NewWindow(10 * time.Millisecond)
	steps := []struct {
		op   Op
		ts   int64
		u, v uint32
		w    float64
		hasW bool
		want []C
	}{
		{OpAdd, 0, 1, 2, 0, false, []C{{Op: tracker.OpAdd, U: 1, V: 2, W: 1}}},
		{OpAdd, 1, 2, 3, 2, true, []C{{Op: tracker.OpAdd, U: 2, V: 3, W: 2}}},
		{OpRemove, 2, 7, 8, 1, true, nil},  // absent edge: nothing
		{OpRemove, 2, 7, 8, 0, false, nil}, // likewise
		{OpSet, 2, 7, 8, 0, true, nil},     // set 0 of an absent edge
		{OpAdd, 3, 1, 2, 4, true, []C{{Op: tracker.OpAdd, U: 1, V: 2, W: 4}}},
		{OpRemove, 4, 2, 1, 2, true, []C{{Op: tracker.OpAdd, U: 2, V: 1, W: -2}}}, // 1 (ts 0) whole, 1 of 4 (ts 3)
		// ts 10: the ts-0 increment is already consumed; nothing expires
		// until 11 (2-3, its last: delete; node 3 has no edge left, node 2
		// still has 1-2).
		{OpAdd, 11, 4, 5, 1, true, []C{{Op: tracker.OpDelete, U: 2, V: 3}, {Op: tracker.OpRemoveNode, U: 3}, {Op: tracker.OpAdd, U: 4, V: 5, W: 1}}},
		{OpSet, 12, 1, 2, 9, true, []C{{Op: tracker.OpSet, U: 1, V: 2, W: 9}}},
		{OpAdd, 1, 1, 2, 5, true, nil}, // late: expiry 11 <= watermark 12
		// Removing node 1 takes 1-2, node 2's last edge.
		{OpNodeRemove, 12, 1, 0, 0, false, []C{{Op: tracker.OpRemoveNode, U: 1}, {Op: tracker.OpRemoveNode, U: 2}}},
		{OpRemove, 12, 4, 5, 0, false, []C{{Op: tracker.OpDelete, U: 4, V: 5}, {Op: tracker.OpRemoveNode, U: 4}, {Op: tracker.OpRemoveNode, U: 5}}},
		// A set that replaces an edge's increments keeps its endpoints.
		{OpAdd, 13, 6, 7, 1, true, []C{{Op: tracker.OpAdd, U: 6, V: 7, W: 1}}},
		{OpSet, 14, 7, 6, 2, true, []C{{Op: tracker.OpSet, U: 7, V: 6, W: 2}}},
		{OpSet, 15, 6, 7, 0, true, []C{{Op: tracker.OpDelete, U: 6, V: 7}, {Op: tracker.OpRemoveNode, U: 6}, {Op: tracker.OpRemoveNode, U: 7}}},
		{OpSet, 30, 6, 7, 0, true, nil},
	}
	for i, s := range steps {
		got := win.AppendChanges(nil, s.op, s.ts, s.u, s.v, s.w, s.hasW)
		if !slices.Equal(got, s.want) {
			t.Fatalf("step %d (%v at %d): changes %v, want %v", i, s.op, s.ts, got, s.want)
		}
	}
	if win.Len() != 0 {
		t.Fatalf("%d increments left", win.Len())
	}
}

// TestEdgeTableMatchesMap checks the open-addressing table against Go's
// map through growth and many backward-shift deletions.
func TestEdgeTableMatchesMap(t *testing.T) {
	var tab edgeTable
	tab.init()
	ref := map[uint64]uint32{}
	rng := rand.New(rand.NewPCG(5, 5))
	for i := 0; i < 200000; i++ {
		k := uint64(rng.IntN(512))<<32 | uint64(rng.IntN(512))
		if _, ok := ref[k]; ok {
			tab.remove(k)
			delete(ref, k)
		} else {
			tab.insert(k, uint32(i))
			ref[k] = uint32(i)
		}
		if i%1000 == 0 {
			for k, v := range ref {
				if got := tab.find(k); got != v {
					t.Fatalf("step %d: find(%x) = %d, want %d", i, k, got, v)
				}
			}
			if tab.n != len(ref) {
				t.Fatalf("step %d: %d entries, want %d", i, tab.n, len(ref))
			}
		}
		if got := tab.find(k ^ 1<<63); got != noIdx {
			t.Fatalf("find of an absent key = %d", got)
		}
	}
}

// BenchmarkWindowAppendChanges: one add per event at advancing times over
// 10^5 nodes, with a span holding about 10^5 live increments.
func BenchmarkWindowAppendChanges(b *testing.B) {
	win := NewWindow(100 * time.Second)
	rng := rand.New(rand.NewPCG(1, 1))
	var dst []tracker.Change
	ts := int64(0)
	b.ReportAllocs()
	for b.Loop() {
		ts++
		dst = win.AppendChanges(dst[:0], OpAdd, ts, uint32(rng.IntN(100000)), uint32(rng.IntN(100000)), 1, false)
	}
}
