package main

import (
	"encoding/json"
	"fmt"
	"net/http"
	"time"

	"shoal/snapshot"
	"shoal/tracker"
)

// statsResponse is the body of GET /v1/stats. The graph figures are the
// tracker's: they include every event up to applied_seq except the
// pending_changes not yet handed to it (at most --apply-every events, none
// once the stream is idle).
type statsResponse struct {
	Graph       string  `json:"graph"`
	Nodes       int     `json:"nodes"`
	Edges       int     `json:"edges"`
	TotalWeight float64 `json:"total_weight"`
	// Objective and Quality: the objective the tracker maximises and its
	// value (Q, or the CPM value H); Modularity is Q (at resolution 1 for
	// cpm, for comparison).
	Objective   string  `json:"objective"`
	Quality     float64 `json:"quality"`
	Modularity  float64 `json:"modularity"`
	Communities int     `json:"communities"`
	// AppliedSeq is the stream sequence of the last message applied;
	// EventsApplied and EventsRejected count good events and rejected lines
	// since the store was created, committed with the batches (exact
	// across crashes).
	AppliedSeq      uint64 `json:"applied_seq"`
	EventsApplied   uint64 `json:"events_applied"`
	EventsRejected  uint64 `json:"events_rejected"`
	MessagesApplied uint64 `json:"messages_applied"`
	// Watermark is the largest event time seen (RFC 3339; empty if none).
	Watermark      string  `json:"watermark"`
	WatermarkMs    *int64  `json:"watermark_ms"`
	PendingChanges int     `json:"pending_changes"`
	Duplicates     uint64  `json:"duplicates"`
	Repositions    uint64  `json:"repositions"`
	ConsumerLag    uint64  `json:"consumer_lag"`
	Consuming      bool    `json:"consuming"`
	Snapshots      int64   `json:"snapshots"`
	LastSnapshot   *uint64 `json:"last_snapshot"`
	LastSnapshotAt string  `json:"last_snapshot_time,omitempty"`
	Window         string  `json:"window"`
	Pseudonymized  bool    `json:"pseudonymized"`
	StoreBytes     uint64  `json:"store_bytes"`
	UptimeSeconds  float64 `json:"uptime_seconds"`
	OutboxError    string  `json:"outbox_error,omitempty"`
	// Hubs is what the hub policy keeps out of the tracker, as of the last
	// snapshot (absent without a policy); the graph figures above are of
	// the graph without them.
	Hubs *hubReport `json:"hubs,omitempty"`
}

func (d *daemon) stats() statsResponse {
	cs := d.cons.Stats()
	st := cs.State
	r := statsResponse{
		Graph: d.o.graph, AppliedSeq: st.Applied, EventsApplied: st.EventsApplied, EventsRejected: st.EventsRejected,
		MessagesApplied: st.Messages, PendingChanges: d.tl.Stats().Pending, Duplicates: cs.Duplicates, Repositions: cs.Repositions,
		ConsumerLag: cs.Lag, Consuming: cs.Consuming, Snapshots: d.snapshots.Load(), Window: windowText(d.o.window),
		Pseudonymized: d.pseudo != nil, StoreBytes: d.store.DiskUsage(), UptimeSeconds: time.Since(d.started).Seconds(),
	}
	if st.Watermark != minTime {
		wm := st.Watermark
		r.WatermarkMs = &wm
		r.Watermark = snapshot.RFC3339(wm)
	}
	if h := d.lastSnap.Load(); h != nil {
		id := h.ID
		r.LastSnapshot = &id
		r.LastSnapshotAt = snapshot.RFC3339(h.Time)
	}
	if e := d.outboxErr.Load(); e != nil {
		r.OutboxError = *e
	}
	if !d.o.hubs.off() {
		r.Hubs = newHubReport(d.o.hubs, d.tl.Stats().Hubs, -1)
	}
	d.tl.Read(func(tr *tracker.Tracker) {
		g := tr.Graph()
		r.Nodes, r.Edges, r.TotalWeight = g.Nodes(), g.Edges(), g.TotalWeight()
		r.Modularity, r.Communities = finite(tr.Modularity()), tr.NumCommunities()
		r.Objective, r.Quality = tr.Options().Objective.String(), finite(tr.Quality())
	})
	return r
}

const minTime = -1 << 63

// handler serves /healthz (the process is up), /readyz (the tracker is
// built and the consumer is receiving), /v1/stats (JSON) and /metrics
// (Prometheus text format).
func (d *daemon) handler() http.Handler {
	mux := http.NewServeMux()
	mux.HandleFunc("GET /healthz", func(w http.ResponseWriter, _ *http.Request) {
		w.Header().Set("Content-Type", "text/plain; charset=utf-8")
		fmt.Fprintln(w, "ok")
	})
	mux.HandleFunc("GET /readyz", func(w http.ResponseWriter, _ *http.Request) {
		w.Header().Set("Content-Type", "text/plain; charset=utf-8")
		switch {
		case !d.ready.Load() || !d.cons.Stats().Consuming:
			w.WriteHeader(http.StatusServiceUnavailable)
			fmt.Fprintln(w, "not ready: the consumer is not receiving (starting, or repositioning)")
			return
		case !d.nc.IsConnected():
			w.WriteHeader(http.StatusServiceUnavailable)
			fmt.Fprintln(w, "not ready: the NATS server is unreachable (reconnecting)")
			return
		}
		fmt.Fprintln(w, "ready")
	})
	mux.HandleFunc("GET /v1/stats", func(w http.ResponseWriter, _ *http.Request) {
		w.Header().Set("Content-Type", "application/json")
		enc := json.NewEncoder(w)
		enc.SetIndent("", "  ")
		_ = enc.Encode(d.stats())
	})
	mux.HandleFunc("GET /metrics", func(w http.ResponseWriter, _ *http.Request) {
		w.Header().Set("Content-Type", "text/plain; version=0.0.4; charset=utf-8")
		s := d.stats()
		wm := 0.0
		if s.WatermarkMs != nil {
			wm = float64(*s.WatermarkMs) / 1000
		}
		ready := 0.0
		if s.Consuming {
			ready = 1
		}
		for _, m := range []struct {
			name, kind, help string
			v                float64
		}{
			{"shoal_events_applied_total", "counter", "Good edge events applied since the store was created.", float64(s.EventsApplied)},
			{"shoal_events_rejected_total", "counter", "Rejected lines and empty messages since the store was created.", float64(s.EventsRejected)},
			{"shoal_messages_applied_total", "counter", "Messages applied since the store was created.", float64(s.MessagesApplied)},
			{"shoal_duplicates_total", "counter", "Redelivered messages acknowledged without being applied, since start.", float64(s.Duplicates)},
			{"shoal_repositions_total", "counter", "Consumer resets to the stored sequence after a delivery gap, since start.", float64(s.Repositions)},
			{"shoal_applied_sequence", "gauge", "Stream sequence of the last message applied.", float64(s.AppliedSeq)},
			{"shoal_watermark_seconds", "gauge", "Event-time watermark, Unix seconds.", wm},
			{"shoal_consumer_lag_messages", "gauge", "Messages pending on the consumer.", float64(s.ConsumerLag)},
			{"shoal_pending_changes", "gauge", "Changes not yet handed to the tracker.", float64(s.PendingChanges)},
			{"shoal_consuming", "gauge", "1 while the consumer is receiving.", ready},
			{"shoal_nodes", "gauge", "Nodes in the graph.", float64(s.Nodes)},
			{"shoal_edges", "gauge", "Edges in the graph.", float64(s.Edges)},
			{"shoal_total_weight", "gauge", "Total edge weight m.", s.TotalWeight},
			{"shoal_modularity", "gauge", "Modularity of the current partition.", s.Modularity},
			{"shoal_quality", "gauge", "Value of the tracked objective (modularity, or the CPM value) of the current partition.", s.Quality},
			{"shoal_communities", "gauge", "Communities in the current partition.", float64(s.Communities)},
			{"shoal_snapshots", "gauge", "Snapshots kept in the store.", float64(s.Snapshots)},
			{"shoal_store_bytes", "gauge", "Bytes the store takes on disk.", float64(s.StoreBytes)},
		} {
			fmt.Fprintf(w, "# HELP %s %s\n# TYPE %s %s\n%s{graph=%q} %g\n", m.name, m.help, m.name, m.kind, m.name, s.Graph, m.v)
		}
	})
	return mux
}
