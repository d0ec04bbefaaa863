package main

import (
	"context"
	"flag"
	"log/slog"
	"strings"
	"time"

	"shoal/ingest"
)

// shoal run: the daemon. See daemon.go for the order of things and
// ingest/doc.go for the store and the exactly-once protocol.
func runRun(ctx context.Context, e *env, args []string) error {
	fs := newFlags(e, "run", "--data DIR [options]")
	data := fs.String("data", "", "data directory: the store (DIR/store) and, with no --nats, the embedded server's JetStream files (DIR/nats) (required)")
	graph := fs.String("graph", "", "graph name, in subjects and stream names (default: the store's, or \"default\" for a new store)")
	nf := addNATSFlags(fs, "", "NATS server or cluster URL(s), comma separated; empty: run an embedded server with JetStream")
	natsListen := fs.String("nats-listen", "127.0.0.1:4222", "address of the embedded NATS server (port 0: any free port)")
	stream := fs.String("stream", "", "ingest stream (default SHOAL_EDGES_<graph>; created if absent)")
	subject := fs.String("subject", "", "ingest subject (default shoal.edges.<graph>)")
	durable := fs.String("durable", "", "durable pull consumer (default shoal-<graph>; created if absent)")
	eventsStream := fs.String("events-stream", "", "stream of the lifecycle events (default SHOAL_EVENTS_<graph>; created if absent)")
	eventsPrefix := fs.String("events-subject", "", "subject prefix of the lifecycle events: PREFIX.<type> (default shoal.events.<graph>)")
	rejectsStream := fs.String("rejects-stream", "", "stream of rejected input (default SHOAL_REJECTS_<graph>; created if absent)")
	rejectsSubject := fs.String("rejects-subject", "", "subject of rejected input (default shoal.rejects.<graph>)")
	maxAge := fs.Duration("stream-max-age", 0, "when creating the ingest stream: drop messages older than this (0: keep)")
	maxBytes := fs.Int64("stream-max-bytes", 0, "when creating the ingest stream: its size limit in bytes (0: none)")
	httpAddr := fs.String("http", "127.0.0.1:7847", "HTTP address of /healthz, /readyz, /v1/stats, /metrics (\"\" or off: none)")
	tf := addTimelineFlags(fs, "snapshot-", time.Hour)
	keep := fs.Int("snapshot-keep", 48, "full snapshots kept in the store (at least 2; the lineage and the events are kept for --history)")
	onExit := fs.Bool("snapshot-on-exit", false, "take a snapshot at shutdown if events came since the last")
	maxBatch := fs.Int("max-batch", 1000, "messages per batch: one synced commit and one ack each")
	idleApply := fs.Duration("idle-apply", 0, "apply the pending events when nothing came for this long (default 1s; also at once when nothing is pending)")
	trf := addTrackerFlags(fs, true)
	mf := addMatchFlags(fs)
	hf := addHubFlags(fs)
	rebuild := fs.String("rebuild", "auto", "how the tracker is rebuilt at start: snapshot (the last snapshot's partition on the stored edges), static (from scratch), auto (snapshot when there is one)")
	keyFile := fs.String("pseudonymize-key-file", "", "replace node ids at ingest by HMAC-SHA-256 pseudonyms under the key in FILE (at least 16 bytes; fixed when the store is created)")
	readyFile := fs.String("ready-file", "", "write {\"http\":..,\"nats\":..,\"pid\":..} to FILE once consuming")
	logLevel := fs.String("log-level", "info", "log level: debug, info, warn or error")
	logFormat := fs.String("log-format", "text", "log format: text or json")
	if _, err := parse(fs, args); err != nil {
		return err
	}
	set := map[string]bool{}
	fs.Visit(func(f *flag.Flag) { set[f.Name] = true })

	var level slog.Level
	if err := level.UnmarshalText([]byte(*logLevel)); err != nil {
		return usagef("--log-level %q: want debug, info, warn or error", *logLevel)
	}
	var h slog.Handler
	switch *logFormat {
	case "text":
		h = slog.NewTextHandler(e.stderr, &slog.HandlerOptions{Level: level})
	case "json":
		h = slog.NewJSONHandler(e.stderr, &slog.HandlerOptions{Level: level})
	default:
		return usagef("--log-format %q: want text or json", *logFormat)
	}
	log := slog.New(h)

	switch {
	case *data == "":
		return usagef("--data DIR is required")
	case *graph != "" && !ingest.ValidGraphName(*graph):
		return usagef("--graph %q: want 1..64 letters, digits, '-' or '_'", *graph)
	case *keep < 2:
		return usagef("--snapshot-keep %d: at least 2 (the last one is needed to classify the next)", *keep)
	case *maxBatch < 1:
		return usagef("--max-batch must be at least 1")
	case *rebuild != "auto" && *rebuild != "snapshot" && *rebuild != "static":
		return usagef("--rebuild %q: want auto, snapshot or static", *rebuild)
	}
	if err := nf.validate(); err != nil {
		return err
	}
	topts, err := trf.options()
	if err != nil {
		return err
	}
	sched, err := tf.schedule()
	if err != nil {
		return err
	}
	eo, err := mf.options(nil)
	if err != nil {
		return err
	}
	hp, err := hf.policy()
	if err != nil {
		return err
	}
	o := &daemonOptions{
		data: *data, graph: *graph, window: *tf.window, windowSet: set["window"],
		natsURL: *nf.url, natsListen: *natsListen, nf: nf,
		consumer: ingest.ConsumerOptions{
			Stream: *stream, Subject: *subject, Durable: *durable,
			StreamMaxAge: *maxAge, StreamMaxBytes: *maxBytes,
			MaxBatch: *maxBatch, IdleApply: *idleApply,
		},
		httpAddr: *httpAddr, schedule: sched, scheduleSet: set[tf.names[0]] || set[tf.names[1]],
		applyEvery: *tf.applyEvery, history: *tf.history, snapshotKeep: *keep, snapshotOnExit: *onExit,
		topts: topts, objectiveSet: set["objective"] || set["resolution"], eo: eo, hubs: hp, hubsSet: hf.given(fs), rebuild: *rebuild, keyFile: *keyFile, readyFile: *readyFile,
	}
	if strings.EqualFold(o.httpAddr, "off") {
		o.httpAddr = ""
	}
	// The graph name may come from the store: names that depend on it are
	// filled in once it is known.
	return runDaemonNamed(ctx, e, o, log, *eventsStream, *eventsPrefix, *rejectsStream, *rejectsSubject)
}

// runDaemonNamed resolves the graph name (flag or store) before the names
// derived from it, then runs the daemon.
func runDaemonNamed(ctx context.Context, e *env, o *daemonOptions, log *slog.Logger, evStream, evPrefix, rjStream, rjSubject string) error {
	o.deriveNames = func(graph string) {
		o.eventsStream = orDefault(evStream, "SHOAL_EVENTS_"+graph)
		o.eventsPrefix = orDefault(evPrefix, "shoal.events."+graph)
		o.rejectsStream = orDefault(rjStream, "SHOAL_REJECTS_"+graph)
		o.rejectsSubject = orDefault(rjSubject, "shoal.rejects."+graph)
	}
	return runDaemon(ctx, e, o, log)
}

func orDefault(s, def string) string {
	if s == "" {
		return def
	}
	return s
}
