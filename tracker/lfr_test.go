package tracker_test

import (
	"errors"
	"testing"

	"shoal/tracker"
	"shoal/tracker/gen"
)

// lfr generates an LFR graph of the standard S set. A draw of community
// sizes that cannot hold the degrees (gen.ErrInfeasible, possible at low
// mu) is redrawn with the next seed, as the LFR procedure resamples.
func lfr(t testing.TB, n int, mu float64, seed uint64) *gen.Graph {
	return lfrSizes(t, n, mu, seed, 10, 50)
}

// lfrSizes is lfr with other community sizes (the B set is 20-100).
func lfrSizes(t testing.TB, n int, mu float64, seed uint64, smin, smax int) *gen.Graph {
	t.Helper()
	for try := uint64(0); try < 10; try++ {
		g, err := gen.LFR(gen.LFROptions{N: n, AvgDegree: 20, MaxDegree: 50, MinCommunity: smin, MaxCommunity: smax, Mu: mu, Seed: seed + try*1000})
		if errors.Is(err, gen.ErrInfeasible) {
			continue
		}
		if err != nil {
			t.Fatal(err)
		}
		return g
	}
	t.Fatal("no feasible LFR draw in 10 seeds")
	return nil
}

// TestLFRRecovery: on the standard LFR set of Lancichinetti and Fortunato
// 2009 (N = 1000, <k> = 20, k_max = 50, sizes 10-50; testdata/SOURCES.md
// section 4), Louvain recovers the planted partition almost perfectly up to
// mu = 0.4 (NMI >= 0.9 here) and NMI does not increase with mu. Each point
// averages 5 realisations (the paper averages 100).
func TestLFRRecovery(t *testing.T) {
	prev := 1.0
	for _, mu := range []float64{0.1, 0.2, 0.3, 0.4} {
		sum := 0.0
		const reps = 5
		for r := uint64(0); r < reps; r++ {
			g := lfr(t, 1000, mu, 100+r)
			p := tracker.Detect(tracker.NewGraph(g.N, g.Edges), &tracker.Options{Seed: r})
			sum += tracker.NMI(p.Membership, g.Membership)
		}
		nmi := sum / reps
		t.Logf("mu %.1f: mean NMI %.4f", mu, nmi)
		if nmi < 0.9 {
			t.Errorf("mu %.1f: NMI %.4f < 0.9", mu, nmi)
		}
		if nmi > prev+0.005 {
			t.Errorf("mu %.1f: NMI %.4f above %.4f at the lower mu", mu, nmi, prev)
		}
		prev = nmi
	}
}

// TestIncrementalTracksStatic: 100 consecutive batches of 10^-3 |E| random
// changes (gen.Churn: half removals, half additions, a quarter of those
// inside planted communities) on LFR N = 10^4, mu = 0.3, with the B set's
// community sizes 20-100 (on the S set, 10-50, a static run already falls
// below NMI 0.9 at this N: the resolution limit). The incremental
// partition stays within 0.01 of a static run from scratch on the same
// final graph and keeps NMI >= 0.9 against the planted partition (the
// bounds of the incremental issue; the dynamic-frontier method, Sahu 2024,
// reports modularity on par with static Louvain).
func TestIncrementalTracksStatic(t *testing.T) {
	if testing.Short() {
		t.Skip("long")
	}
	g := lfrSizes(t, 10000, 0.3, 7, 20, 100)
	tr, err := tracker.NewFrom(tracker.NewGraph(g.N, g.Edges), &tracker.Options{Seed: 1})
	if err != nil {
		t.Fatal(err)
	}
	churn := gen.NewChurn(g, 3)
	size := len(g.Edges) / 1000
	for b := 0; b < 100; b++ {
		if _, err := tr.Apply(churn.Batch(size)); err != nil {
			t.Fatal(err)
		}
	}
	if err := tr.Check(); err != nil {
		t.Fatal(err)
	}
	static := tracker.Detect(tr.Graph(), &tracker.Options{Seed: 1})
	t.Logf("static NMI vs planted %.4f", tracker.NMI(static.Membership, g.Membership))
	qi := tr.Modularity()
	nmi := tracker.NMI(tr.Membership(nil), g.Membership)
	t.Logf("after 100 batches of %d: incremental Q %.4f, static Q %.4f, NMI vs planted %.4f", size, qi, static.Modularity, nmi)
	if qi < static.Modularity-0.01 {
		t.Errorf("incremental Q %.4f more than 0.01 below static %.4f", qi, static.Modularity)
	}
	if nmi < 0.9 {
		t.Errorf("NMI vs planted %.4f < 0.9", nmi)
	}
}

// groupRecall is tracker.GroupRecovery on the tracker's partition.
func groupRecall(tr *tracker.Tracker, nodes []uint32) (recall, precision float64) {
	return tracker.GroupRecovery(tr.Membership(nil), nodes)
}

// TestPlantedGroupForms: a dense group planted by one batch, on new nodes
// and on existing nodes drawn from many communities, ends up inside one
// community (recall >= 0.9; our own bar on a worked example of the
// tracker's job), as a static run from scratch also finds it.
func TestPlantedGroupForms(t *testing.T) {
	for _, existing := range []bool{false, true} {
		g := lfr(t, 2000, 0.3, 11)
		tr, err := tracker.NewFrom(tracker.NewGraph(g.N, g.Edges), &tracker.Options{Seed: 1})
		if err != nil {
			t.Fatal(err)
		}
		churn := gen.NewChurn(g, 5)
		var nodes []uint32
		for i := 0; i < 30; i++ {
			if existing {
				nodes = append(nodes, uint32(i*61%g.N))
			} else {
				nodes = append(nodes, uint32(g.N+i))
			}
		}
		// Ring members transact repeatedly: weight 3 per pair.
		batch := churn.Group(nodes, 0.6)
		for i := range batch {
			batch[i].W = 3
		}
		if !existing {
			// New accounts also touch the rest of the graph a little.
			for i, u := range nodes[:10] {
				batch = append(batch, tracker.Change{Op: tracker.OpAdd, U: u, V: uint32(i * 97), W: 1})
			}
		}
		if _, err := tr.Apply(batch); err != nil {
			t.Fatal(err)
		}
		if err := tr.Check(); err != nil {
			t.Fatal(err)
		}
		rec, prec := groupRecall(tr, nodes)
		st, _ := tracker.NewFrom(tr.Graph(), &tracker.Options{Seed: 1})
		srec, sprec := groupRecall(st, nodes)
		t.Logf("existing=%v: recall %.3f precision %.3f (static from scratch %.3f %.3f) Q %.4f static %.4f", existing, rec, prec, srec, sprec, tr.Modularity(), st.Modularity())
		if rec < 0.9 {
			t.Errorf("existing=%v: planted group recall %.3f, want >= 0.9", existing, rec)
		}
		// New accounts form a community of their own; a ring of existing
		// accounts may share its community with others when modularity
		// says so: then the tracker must agree with a run from scratch.
		if (!existing && prec < 0.9) || prec < sprec-0.1 {
			t.Errorf("existing=%v: precision %.3f (from scratch %.3f)", existing, prec, sprec)
		}
	}
}

// TestDissolvedGroupFallsApart: removing every internal edge of a planted
// community leaves no community holding half of its nodes.
func TestDissolvedGroupFallsApart(t *testing.T) {
	g := lfr(t, 2000, 0.2, 13)
	tr, err := tracker.NewFrom(tracker.NewGraph(g.N, g.Edges), &tracker.Options{Seed: 1})
	if err != nil {
		t.Fatal(err)
	}
	churn := gen.NewChurn(g, 5)
	nodes := churn.Members(0)
	before, _ := groupRecall(tr, nodes)
	r, err := tr.Apply(churn.Dissolve(0))
	if err != nil {
		t.Fatal(err)
	}
	if err := tr.Check(); err != nil {
		t.Fatal(err)
	}
	after, _ := groupRecall(tr, nodes)
	t.Logf("group of %d: recall %.3f before, %.3f after (%d splits, %d moves)", len(nodes), before, after, r.Splits, r.Moves)
	if before < 0.9 || after >= 0.5 {
		t.Errorf("recall %.3f before (want >= 0.9), %.3f after (want < 0.5)", before, after)
	}
}
