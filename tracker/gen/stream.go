package gen

import (
	"bufio"
	"fmt"
	"io"
	"math/rand/v2"
)

// WriteStream writes a generated, time-ordered stream of n edge events for
// the replay benchmarks: a planted partition (10^5 nodes in 500 groups,
// mean degree 8, mixing 0.2) whose edges are drawn at random again and
// again, one event every 0..2 s of event time from Unix time 1.7e9 s, ids
// "n<node>". With jsonl it writes JSON lines, 96% adds and 4% removes of an
// edge added before; otherwise a "src dst ts" edge list of adds only.
// Seeded and deterministic.
func WriteStream(w io.Writer, n int, jsonl bool) error {
	g, err := Planted(PlantedOptions{N: 100000, Groups: 500, AvgDegree: 8, Mu: 0.2, Seed: 1})
	if err != nil {
		return err
	}
	bw := bufio.NewWriterSize(w, 1<<20)
	rng := rand.New(rand.NewPCG(2, 3))
	ts := int64(1_700_000_000_000)
	var added []int
	var line []byte
	for i := 0; i < n; i++ {
		ts += int64(rng.IntN(2001))
		if jsonl && len(added) > 0 && rng.IntN(25) == 0 {
			k := rng.IntN(len(added))
			e := g.Edges[added[k]]
			added[k] = added[len(added)-1]
			added = added[:len(added)-1]
			line = fmt.Appendf(line[:0], `{"op":"remove","src":"n%d","dst":"n%d","w":1,"ts":%d}`+"\n", e.U, e.V, ts)
		} else {
			k := rng.IntN(len(g.Edges))
			e := g.Edges[k]
			added = append(added, k)
			if jsonl {
				line = fmt.Appendf(line[:0], `{"op":"add","src":"n%d","dst":"n%d","ts":%d}`+"\n", e.U, e.V, ts)
			} else {
				line = fmt.Appendf(line[:0], "n%d\tn%d\t%d\n", e.U, e.V, ts)
			}
		}
		if _, err := bw.Write(line); err != nil {
			return err
		}
	}
	return bw.Flush()
}
