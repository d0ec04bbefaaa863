package main

import (
	"context"
	"encoding/json"
	"fmt"
	"io"
	"net/http"
	"strings"
	"time"
)

// shoal query stats --http ADDR [--json]: ask a running daemon. Only
// stats for now; the node, community and events queries come with the
// full query API.
func runQuery(ctx context.Context, e *env, args []string) error {
	fs := newFlags(e, "query", "stats [--http ADDR] [--json]")
	addr := fs.String("http", "127.0.0.1:7847", "HTTP address of the daemon")
	asJSON := fs.Bool("json", false, "print the daemon's JSON as it is")
	timeout := fs.Duration("timeout", 10*time.Second, "give up after this long")
	pos, err := parse(fs, args)
	if err != nil {
		return err
	}
	if len(pos) != 1 || pos[0] != "stats" {
		return usagef("want: shoal query stats (node, community and events queries are not built yet)")
	}
	base := *addr
	if !strings.Contains(base, "://") {
		base = "http://" + base
	}
	ctx, cancel := context.WithTimeout(ctx, *timeout)
	defer cancel()
	req, err := http.NewRequestWithContext(ctx, http.MethodGet, strings.TrimRight(base, "/")+"/v1/stats", nil)
	if err != nil {
		return usagef("--http %q: %v", *addr, err)
	}
	resp, err := http.DefaultClient.Do(req)
	if err != nil {
		return fmt.Errorf("no daemon answering at %s: %w", *addr, err)
	}
	defer resp.Body.Close()
	body, err := io.ReadAll(io.LimitReader(resp.Body, 1<<20))
	if err != nil {
		return err
	}
	if resp.StatusCode != http.StatusOK {
		return fmt.Errorf("%s: %s: %s", req.URL, resp.Status, strings.TrimSpace(string(body)))
	}
	if *asJSON {
		_, err := e.stdout.Write(body)
		return err
	}
	var m map[string]any
	if err := json.Unmarshal(body, &m); err != nil {
		return fmt.Errorf("%s: not JSON: %w", req.URL, err)
	}
	order := []string{"graph", "nodes", "edges", "total_weight", "modularity", "communities", "applied_seq", "events_applied",
		"events_rejected", "messages_applied", "watermark", "pending_changes", "consumer_lag", "consuming", "duplicates",
		"repositions", "snapshots", "last_snapshot", "last_snapshot_time", "window", "pseudonymized", "store_bytes",
		"uptime_seconds", "outbox_error"}
	for _, k := range order {
		if v, ok := m[k]; ok && v != nil {
			if f, ok := v.(float64); ok && f == float64(int64(f)) {
				fmt.Fprintf(e.stdout, "%-20s %d\n", k, int64(f))
			} else {
				fmt.Fprintf(e.stdout, "%-20s %v\n", k, v)
			}
		}
	}
	return nil
}
