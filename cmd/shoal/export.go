package main

import (
	"bufio"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"strconv"

	"shoal/events"
	"shoal/ingest"
	"shoal/snapshot"
)

// shoal export edges|nodes|snapshots|snapshot ID|events [ID]|history
// --data DIR: print the stored state with the daemon stopped (the store is
// opened read-only; a running daemon holds its lock). history is the
// lineage kept for --history (events.History, JSON lines): it outlives the
// snapshots.
func runExport(ctx context.Context, e *env, args []string) error {
	fs := newFlags(e, "export", "edges|nodes|snapshots|snapshot ID|latest|events [ID]|history --data DIR [options]")
	data := fs.String("data", "", "data directory of the daemon (required)")
	asJSON := fs.Bool("json", false, "JSON lines instead of TSV")
	out := fs.String("out", "", "write to FILE instead of stdout (replaced only when complete)")
	pos, err := parse(fs, args)
	if err != nil {
		return err
	}
	if *data == "" {
		return usagef("--data DIR is required")
	}
	if len(pos) == 0 {
		return usagef("what to export: edges, nodes, snapshots, snapshot ID (or latest), events [ID], history")
	}
	what := pos[0]
	var snapID uint64
	latest := false
	switch what {
	case "edges", "nodes", "snapshots", "history":
		if len(pos) != 1 {
			return usagef("export %s takes no argument", what)
		}
	case "snapshot", "events":
		if what == "snapshot" && len(pos) != 2 {
			return usagef("export snapshot ID: give a snapshot id or latest")
		}
		if len(pos) > 2 {
			return usagef("export %s [ID]: one id at most", what)
		}
		if len(pos) == 2 {
			if pos[1] == "latest" {
				latest = true
			} else if snapID, err = strconv.ParseUint(pos[1], 10, 64); err != nil || snapID == 0 {
				return usagef("snapshot id %q: want a positive integer or latest", pos[1])
			}
		}
	default:
		return usagef("unknown export %q: want edges, nodes, snapshots, snapshot ID, events or history", what)
	}
	s, err := ingest.OpenStore(ingest.StoreDir(*data), &ingest.StoreOptions{ReadOnly: true, AnyWindow: true, AnyKey: true})
	if err != nil {
		return err
	}
	defer s.Close()
	write := func(w io.Writer) error {
		switch what {
		case "edges":
			return exportEdges(w, s, *asJSON)
		case "nodes":
			return exportNodes(w, s, *asJSON)
		case "snapshots":
			return exportSnapshots(w, s, *asJSON)
		case "snapshot":
			return exportSnapshot(w, s, snapID, latest, *asJSON)
		case "history":
			return exportHistory(w, s)
		default:
			return exportEvents(w, s, snapID, latest)
		}
	}
	if *out != "" {
		return writeFileAtomic(*out, write)
	}
	bw := bufio.NewWriterSize(e.stdout, 1<<16)
	if err := write(bw); err != nil {
		return err
	}
	return bw.Flush()
}

// exportHistory prints the lineage history as JSON lines (schema
// events.HistorySchema): the snapshot index, one line per community with
// its points, one per node with its community and since when.
func exportHistory(w io.Writer, s *ingest.Store) error {
	nm, err := names(s)
	if err != nil {
		return err
	}
	h, err := events.LoadHistory(s.DB(), &events.HistoryOptions{})
	if err != nil {
		return err
	}
	return h.WriteJSONLFrom(w, s.DB(), func(v uint32) string {
		if int(v) < len(nm) {
			return nm[v]
		}
		return strconv.FormatUint(uint64(v), 10)
	})
}

// names reads the dictionary: internal id -> external id.
func names(s *ingest.Store) ([]string, error) {
	var out []string
	err := s.Nodes(func(id uint32, name string, _ bool) error {
		out = append(out, name)
		return nil
	})
	return out, err
}

func fmtWeight(w float64) string { return strconv.FormatFloat(w, 'g', -1, 64) }

// exportEdges prints src<TAB>dst<TAB>weight per edge, in internal id order
// (src is the end with the smaller internal id).
func exportEdges(w io.Writer, s *ingest.Store, asJSON bool) error {
	nm, err := names(s)
	if err != nil {
		return err
	}
	enc := json.NewEncoder(w)
	return s.Edges(func(u, v uint32, wt float64) error {
		if asJSON {
			return enc.Encode(struct {
				Src string  `json:"src"`
				Dst string  `json:"dst"`
				W   float64 `json:"w"`
			}{nm[u], nm[v], wt})
		}
		_, err := fmt.Fprintf(w, "%s\t%s\t%s\n", nm[u], nm[v], fmtWeight(wt))
		return err
	})
}

// exportNodes prints node<TAB>degree<TAB>edges per node of the dictionary
// (degree: weighted, a self-loop counting twice; a node without edges has
// left the graph but keeps its id).
func exportNodes(w io.Writer, s *ingest.Store, asJSON bool) error {
	nm, err := names(s)
	if err != nil {
		return err
	}
	deg := make([]float64, len(nm))
	cnt := make([]int, len(nm))
	err = s.Edges(func(u, v uint32, wt float64) error {
		deg[u] += wt
		deg[v] += wt
		cnt[u]++
		if v != u {
			cnt[v]++
		}
		return nil
	})
	if err != nil {
		return err
	}
	enc := json.NewEncoder(w)
	if !asJSON {
		if _, err := fmt.Fprintln(w, "# node\tdegree\tedges"); err != nil {
			return err
		}
	}
	for i, n := range nm {
		if asJSON {
			err = enc.Encode(struct {
				Node   string  `json:"node"`
				ID     int     `json:"id"`
				Degree float64 `json:"degree"`
				Edges  int     `json:"edges"`
			}{n, i, deg[i], cnt[i]})
		} else {
			_, err = fmt.Fprintf(w, "%s\t%s\t%d\n", n, fmtWeight(deg[i]), cnt[i])
		}
		if err != nil {
			return err
		}
	}
	return nil
}

func exportSnapshots(w io.Writer, s *ingest.Store, asJSON bool) error {
	hs, err := snapshot.List(s.DB())
	if err != nil {
		return err
	}
	enc := json.NewEncoder(w)
	if !asJSON {
		if _, err := fmt.Fprintln(w, "# id\ttime\twatermark\tseq\tnodes\tedges\tcommunities\tmodularity"); err != nil {
			return err
		}
	}
	for _, h := range hs {
		if asJSON {
			err = enc.Encode(h.JSON())
		} else {
			_, err = fmt.Fprintf(w, "%d\t%s\t%s\t%d\t%d\t%d\t%d\t%.6f\n", h.ID, snapshot.RFC3339(h.Time), snapshot.RFC3339(h.Watermark),
				h.Seq, h.Nodes, h.Edges, h.Communities, h.Modularity)
		}
		if err != nil {
			return err
		}
	}
	return nil
}

func loadSnapshot(s *ingest.Store, id uint64, latest bool) (*snapshot.Snapshot, error) {
	if latest {
		return snapshot.Latest(s.DB())
	}
	return snapshot.Load(s.DB(), id)
}

func exportSnapshot(w io.Writer, s *ingest.Store, id uint64, latest, asJSON bool) error {
	snap, err := loadSnapshot(s, id, latest)
	if errors.Is(err, snapshot.ErrNotFound) {
		return usageError{err}
	}
	if err != nil {
		return err
	}
	nm, err := names(s)
	if err != nil {
		return err
	}
	name := func(u uint32) string {
		if int(u) < len(nm) {
			return nm[u]
		}
		return strconv.FormatUint(uint64(u), 10)
	}
	if asJSON {
		return snapshot.WriteJSONL(w, snap, name)
	}
	return snapshot.WriteTSV(w, snap, name)
}

// exportEvents prints the stored lifecycle events (of one snapshot, or all
// that retention kept) as JSON lines.
func exportEvents(w io.Writer, s *ingest.Store, id uint64, latest bool) error {
	var evs []events.Stored
	var err error
	switch {
	case latest:
		snap, lerr := snapshot.Latest(s.DB())
		if lerr != nil {
			return lerr
		}
		evs, err = events.List(s.DB(), snap.ID)
	case id != 0:
		evs, err = events.List(s.DB(), id)
	default:
		// Every event kept (--history), also those of dropped snapshots.
		evs, err = events.Between(s.DB(), 0, 0)
	}
	if err != nil {
		return err
	}
	for i := range evs {
		if _, err := w.Write(append(evs[i].Raw, '\n')); err != nil {
			return err
		}
	}
	return nil
}
