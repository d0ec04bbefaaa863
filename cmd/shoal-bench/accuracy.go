package main

import (
	"context"
	"errors"
	"fmt"
	"io"

	"shoal/tracker"
	"shoal/tracker/gen"
)

// accuracyRow is one line of `shoal-bench accuracy`: NMI against the
// planted partition on the LFR sets of Lancichinetti and Fortunato 2009.
type accuracyRow struct {
	Set         string  `json:"set"`
	N           int     `json:"n"`
	Mu          float64 `json:"mu"`
	Runs        int     `json:"runs"`
	NMI         float64 `json:"nmi"`
	Modularity  float64 `json:"modularity"`
	Communities float64 `json:"communities"`
	Planted     float64 `json:"planted"`
}

func runAccuracy(ctx context.Context, args []string, w io.Writer) error {
	fs, _, asJSON := commonFlags("accuracy")
	runs := fs.Int("runs", 10, "realisations per point (the paper averages 100)")
	n := fs.Int("n", 1000, "nodes (the paper's sets use 1000 and 5000)")
	if err := fs.Parse(args); err != nil {
		return err
	}
	em := &emitter{w: w, json: *asJSON}
	for _, set := range []struct {
		name       string
		smin, smax int
	}{{"S", 10, 50}, {"B", 20, 100}} {
		for mu := 1; mu <= 8; mu++ {
			if err := ctx.Err(); err != nil {
				return err
			}
			row := accuracyRow{Set: set.name, N: *n, Mu: float64(mu) / 10, Runs: *runs}
			done := 0
			for r := 0; done < *runs && r < *runs*10; r++ {
				g, err := gen.LFR(gen.LFROptions{N: *n, AvgDegree: 20, MaxDegree: 50, MinCommunity: set.smin, MaxCommunity: set.smax, Mu: row.Mu, Seed: uint64(r)})
				if errors.Is(err, gen.ErrInfeasible) {
					continue
				}
				if err != nil {
					return err
				}
				p := tracker.Detect(tracker.NewGraph(g.N, g.Edges), &tracker.Options{Seed: uint64(r)})
				row.NMI += tracker.NMI(p.Membership, g.Membership)
				row.Modularity += p.Modularity
				row.Communities += float64(len(p.Communities))
				row.Planted += float64(g.Communities())
				done++
			}
			d := float64(done)
			row.NMI /= d
			row.Modularity /= d
			row.Communities /= d
			row.Planted /= d
			row.Runs = done
			em.row(row, fmt.Sprintf("%-4s %6s %4s %5s %7s %7s %9s %8s", "set", "n", "mu", "runs", "nmi", "q", "found", "planted"), func() string {
				return fmt.Sprintf("%-4s %6d %4.1f %5d %7.4f %7.4f %9.1f %8.1f", row.Set, row.N, row.Mu, row.Runs, row.NMI, row.Modularity, row.Communities, row.Planted)
			})
		}
	}
	return nil
}
