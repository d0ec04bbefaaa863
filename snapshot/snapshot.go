package snapshot

import (
	"errors"
	"fmt"
	"math"
	"slices"

	"shoal/tracker"
)

// ErrInvalid is returned (wrapped) when a membership, a set of statistics
// or a [Snapshot] handed to this package is inconsistent: a node in a
// community without statistics, a size that does not match the members, a
// non-finite statistic, unsorted members.
var ErrInvalid = errors.New("snapshot: invalid input")

// Header is the summary of one snapshot.
type Header struct {
	// ID is the snapshot id, monotonic per graph (the caller assigns it).
	ID uint64
	// Graph is the graph name.
	Graph string
	// Seq is the stream sequence of the last edge event included.
	Seq uint64
	// Watermark is the event-time watermark (largest event time seen), in
	// Unix milliseconds.
	Watermark int64
	// Time is the snapshot's time in event time (Unix milliseconds): the
	// schedule boundary T it was taken at (it holds exactly the events
	// before T), or the watermark for a snapshot taken on request or at
	// the end of an input. Never the wall clock, so that a replay and the
	// daemon give the same snapshots for the same input.
	Time int64
	// Modularity is the modularity of the partition at resolution Gamma
	// for the modularity objective; for CPM, at resolution 1.
	Modularity float64
	// Gamma is the resolution parameter of the objective.
	Gamma float64
	// Objective is the quality function the tracker maximised; snapshots
	// stored before it was recorded read as modularity.
	Objective tracker.Objective
	// Quality is the value of the objective: Modularity for modularity, H
	// for CPM (see the tracker's doc.go, Objective).
	Quality float64
	// TotalWeight is m, the total edge weight of the graph. If zero, Freeze
	// sets it to half the sum of the community degrees.
	TotalWeight float64
	// Nodes is the number of nodes with a community (Freeze counts them).
	Nodes int
	// Edges is the number of edges of the graph (the caller supplies it).
	Edges int
	// Communities is the number of communities (Freeze counts them).
	Communities int
}

// Community is one frozen community.
type Community struct {
	// ID is the stable community id.
	ID uint64
	// Size is the number of members, len(Members).
	Size int
	// Internal is the weight of the edges with both ends inside, each edge
	// counted once.
	Internal float64
	// Degree is the sum of the weighted degrees of the members (the volume).
	Degree float64
	// Density is the weighted density Internal / (Size*(Size-1)/2): the mean
	// edge weight over all member pairs, 1 for an unweighted clique, 0 for a
	// single node. Self-loops count in Internal, so it can exceed 1.
	Density float64
	// Conductance is cut / min(vol, 2m-vol), with cut = Degree - 2*Internal
	// and vol = Degree; 0 when the denominator is 0.
	Conductance float64
	// Members are the dense internal node ids, strictly increasing.
	Members []uint32
	// Hubs are the hubs adjacent to a member in the full graph, strictly
	// increasing dense ids (package tracker/hub: nodes kept out of the
	// optimisation, so never members); nil without a hub policy. Freeze
	// leaves it nil; the timeline fills it in.
	Hubs []uint32
}

// Snapshot is a frozen partition. Communities is sorted by ID; the embedded
// Header.Communities holds their count (the slice field shadows it).
type Snapshot struct {
	Header
	Communities []Community
}

// Freeze builds a snapshot from membership (the stable community id of each
// dense node id, [tracker.NoCommunity] for absent nodes) and the tracker's
// per-community statistics. Statistics with Size 0 and no members are
// skipped. It sets h.Quality to h.Modularity for the modularity
// objective, h.Nodes and h.Communities from the data (the caller's
// values are ignored), h.TotalWeight if zero, and computes Density and
// Conductance (see [Community]). It runs in O(n + k log k) for n nodes and k
// communities, with no maps. Members share one backing array.
func Freeze(h Header, membership []uint64, stats []tracker.CommunityStats) (*Snapshot, error) {
	if uint64(len(membership)) > math.MaxUint32+1 {
		return nil, fmt.Errorf("%w: %d node ids do not fit in uint32", ErrInvalid, len(membership))
	}
	if !finite(h.TotalWeight) || h.TotalWeight < 0 {
		return nil, fmt.Errorf("%w: total weight %v", ErrInvalid, h.TotalWeight)
	}
	if h.Objective == tracker.ObjectiveModularity {
		h.Quality = h.Modularity
	}
	// Order the statistics by id.
	order := make([]int32, len(stats))
	for i := range order {
		order[i] = int32(i)
	}
	sorted := true
	for i := 1; i < len(stats); i++ {
		if stats[i].ID <= stats[i-1].ID {
			sorted = false
			break
		}
	}
	if !sorted {
		slices.SortFunc(order, func(x, y int32) int {
			a, b := stats[x].ID, stats[y].ID
			switch {
			case a < b:
				return -1
			case a > b:
				return 1
			}
			return 0
		})
	}
	idx := newIDIndex(len(stats))
	sumDeg := 0.0
	for rank, si := range order {
		st := &stats[si]
		if st.ID == tracker.NoCommunity {
			return nil, fmt.Errorf("%w: statistics for the reserved id NoCommunity", ErrInvalid)
		}
		if st.Size < 0 || !finite(st.Internal) || !finite(st.Degree) || st.Internal < 0 || st.Degree < 0 {
			return nil, fmt.Errorf("%w: community %d: size %d, internal %v, degree %v", ErrInvalid, st.ID, st.Size, st.Internal, st.Degree)
		}
		if !idx.insert(st.ID, int32(rank)) {
			return nil, fmt.Errorf("%w: community %d has two statistics records", ErrInvalid, st.ID)
		}
		sumDeg += st.Degree
	}

	// Pass 1: community rank of every node, and the counts.
	rankOf := make([]int32, len(membership))
	counts := make([]int, len(stats)+1)
	nodes := 0
	for v, c := range membership {
		if c == tracker.NoCommunity {
			rankOf[v] = -1
			continue
		}
		r := idx.get(c)
		if r < 0 {
			return nil, fmt.Errorf("%w: node %d is in community %d, which has no statistics", ErrInvalid, v, c)
		}
		rankOf[v] = r
		counts[r+1]++
		nodes++
	}
	k := 0
	for rank, si := range order {
		if got, want := counts[rank+1], stats[si].Size; got != want {
			return nil, fmt.Errorf("%w: community %d has %d members but its statistics say %d", ErrInvalid, stats[si].ID, got, want)
		}
		if counts[rank+1] > 0 {
			k++
		}
	}
	// Prefix sums give each community its slice of the member slab.
	for r := 1; r < len(counts); r++ {
		counts[r] += counts[r-1]
	}
	slab := make([]uint32, nodes)
	next := slices.Clone(counts[:len(stats)])
	// Pass 2: nodes in increasing id order, so members come out sorted.
	for v, r := range rankOf {
		if r < 0 {
			continue
		}
		slab[next[r]] = uint32(v)
		next[r]++
	}

	if h.TotalWeight == 0 {
		h.TotalWeight = sumDeg / 2
	}
	twoM := 2 * h.TotalWeight
	s := &Snapshot{Header: h, Communities: make([]Community, 0, k)}
	for rank, si := range order {
		lo, hi := counts[rank], counts[rank+1]
		if lo == hi {
			continue
		}
		st := &stats[si]
		s.Communities = append(s.Communities, Community{
			ID:          st.ID,
			Size:        st.Size,
			Internal:    st.Internal,
			Degree:      st.Degree,
			Density:     Density(st.Size, st.Internal),
			Conductance: Conductance(st.Internal, st.Degree, twoM),
			Members:     slab[lo:hi:hi],
		})
	}
	s.Nodes = nodes
	s.Header.Communities = len(s.Communities)
	return s, nil
}

// Density is the weighted density of a community of size members and
// internal weight: internal / (size*(size-1)/2), 0 for size < 2.
func Density(size int, internal float64) float64 {
	if size < 2 {
		return 0
	}
	return internal / (float64(size) * float64(size-1) / 2)
}

// Conductance is cut / min(vol, twoM-vol) with cut = degree - 2*internal
// and vol = degree; 0 when the denominator is not positive. A cut below
// zero (rounding in incrementally kept totals) counts as zero.
func Conductance(internal, degree, twoM float64) float64 {
	cut := degree - 2*internal
	if cut < 0 {
		cut = 0
	}
	den := min(degree, twoM-degree)
	if den <= 0 {
		return 0
	}
	return cut / den
}

func finite(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }

// idIndex maps community ids to ranks with open addressing over flat
// slices (no Go map on the per-node path). Not goroutine-safe.
type idIndex struct {
	keys  []uint64
	vals  []int32 // -1: empty slot
	shift uint
}

func newIDIndex(n int) *idIndex {
	bits := uint(3)
	for 1<<bits < 2*n {
		bits++
	}
	x := &idIndex{keys: make([]uint64, 1<<bits), vals: make([]int32, 1<<bits), shift: 64 - bits}
	for i := range x.vals {
		x.vals[i] = -1
	}
	return x
}

func (x *idIndex) slot(k uint64) uint64 { return (k * 0x9E3779B97F4A7C15) >> x.shift }

// insert adds k -> v and reports false if k is already present.
func (x *idIndex) insert(k uint64, v int32) bool {
	mask := uint64(len(x.keys) - 1)
	for i := x.slot(k); ; i = (i + 1) & mask {
		if x.vals[i] < 0 {
			x.keys[i], x.vals[i] = k, v
			return true
		}
		if x.keys[i] == k {
			return false
		}
	}
}

// get returns the value of k, or -1.
func (x *idIndex) get(k uint64) int32 {
	mask := uint64(len(x.keys) - 1)
	for i := x.slot(k); ; i = (i + 1) & mask {
		if x.vals[i] < 0 || x.keys[i] == k {
			return x.vals[i]
		}
	}
}

// InternalZ returns the configuration model's expected internal weight of
// c and c's z-score against it (tracker.InternalZ, with the mean edge
// weight TotalWeight / Edges of the snapshot's graph): a screening figure
// that ranks how unusual each group would be if drawn blind, not a test.
func (s *Snapshot) InternalZ(c *Community) (expected, z float64) {
	wbar := 0.0
	if s.Edges > 0 {
		wbar = s.TotalWeight / float64(s.Edges)
	}
	return tracker.InternalZ(c.Internal, c.Degree, s.TotalWeight, wbar)
}
