package gen

import (
	"math/rand/v2"

	"shoal/tracker"
)

// Churn produces batches of random changes to a generated graph, for the
// incremental tests and benchmarks: half removals of existing edges, half
// additions, a quarter of the additions inside planted communities and the
// rest between uniformly random nodes. It keeps the current edge set, so
// removals always name an edge that exists. Seeded and deterministic.
type Churn struct {
	rng     *rand.Rand
	n       int
	members [][]uint32 // planted communities
	member  []uint32
	edges   []uint64 // current edges as keys
	index   map[uint64]int
}

// NewChurn starts a churn over g's edges and planted partition.
func NewChurn(g *Graph, seed uint64) *Churn {
	c := &Churn{rng: rand.New(rand.NewPCG(seed, 0x5eed)), n: g.N, member: g.Membership, index: make(map[uint64]int, len(g.Edges))}
	k := 0
	for _, m := range g.Membership {
		k = max(k, int(m)+1)
	}
	c.members = make([][]uint32, k)
	for i, m := range g.Membership {
		c.members[m] = append(c.members[m], uint32(i))
	}
	for _, e := range g.Edges {
		c.put(edgeKey(e.U, e.V))
	}
	return c
}

func (c *Churn) put(k uint64) bool {
	if _, ok := c.index[k]; ok {
		return false
	}
	c.index[k] = len(c.edges)
	c.edges = append(c.edges, k)
	return true
}

func (c *Churn) drop(i int) uint64 {
	k := c.edges[i]
	last := len(c.edges) - 1
	c.edges[i] = c.edges[last]
	c.index[c.edges[i]] = i
	c.edges = c.edges[:last]
	delete(c.index, k)
	return k
}

// Edges returns the number of current edges.
func (c *Churn) Edges() int { return len(c.edges) }

// Batch returns size changes and applies them to the churn's edge set.
func (c *Churn) Batch(size int) []tracker.Change {
	out := make([]tracker.Change, 0, size)
	for len(out) < size {
		if len(out)%2 == 0 && len(c.edges) > 0 {
			k := c.drop(c.rng.IntN(len(c.edges)))
			out = append(out, tracker.Change{Op: tracker.OpDelete, U: uint32(k >> 32), V: uint32(k)})
			continue
		}
		var u, v uint32
		if c.rng.IntN(4) == 0 {
			m := c.members[c.member[c.rng.IntN(c.n)]]
			u, v = m[c.rng.IntN(len(m))], m[c.rng.IntN(len(m))]
		} else {
			u, v = uint32(c.rng.IntN(c.n)), uint32(c.rng.IntN(c.n))
		}
		if u == v || !c.put(edgeKey(u, v)) {
			continue
		}
		out = append(out, tracker.Change{Op: tracker.OpAdd, U: u, V: v, W: 1})
	}
	return out
}

// Group returns the changes that plant a new dense group on the given
// nodes: each pair is joined with probability p. The nodes may be new ids
// (at or above the graph's node count) or existing ones.
func (c *Churn) Group(nodes []uint32, p float64) []tracker.Change {
	var out []tracker.Change
	for i, u := range nodes {
		for _, v := range nodes[i+1:] {
			if c.rng.Float64() < p && c.put(edgeKey(u, v)) {
				out = append(out, tracker.Change{Op: tracker.OpAdd, U: u, V: v, W: 1})
			}
		}
	}
	return out
}

// Dissolve returns the changes that delete every edge inside planted
// community m.
func (c *Churn) Dissolve(m int) []tracker.Change {
	var out []tracker.Change
	in := map[uint32]bool{}
	for _, u := range c.members[m] {
		in[u] = true
	}
	for i := 0; i < len(c.edges); {
		k := c.edges[i]
		u, v := uint32(k>>32), uint32(k)
		if in[u] && in[v] {
			c.drop(i)
			out = append(out, tracker.Change{Op: tracker.OpDelete, U: u, V: v})
			continue
		}
		i++
	}
	return out
}

// Members returns the nodes of planted community m.
func (c *Churn) Members(m int) []uint32 { return c.members[m] }
