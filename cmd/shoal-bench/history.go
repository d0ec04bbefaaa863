package main

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"time"

	"github.com/cockroachdb/pebble/v2"

	"shoal/events"
	"shoal/events/timeline"
	"shoal/ingest"
	"shoal/snapshot"
	"shoal/tracker"
	"shoal/tracker/gen"
)

// historyRow is the result of `shoal-bench history`.
type historyRow struct {
	Events     int     `json:"events"`
	Days       float64 `json:"days"`
	Every      string  `json:"every"`
	Snapshots  int     `json:"snapshots"`
	Seconds    float64 `json:"seconds"`
	MeanAlive  float64 `json:"mean_communities_recorded"`
	Points     int64   `json:"points"`
	Bytes      int64   `json:"history_bytes_written"`
	PerCommSn  float64 `json:"bytes_per_community_per_snapshot"`
	NodeBytes  int64   `json:"node_bytes_written"`
	DiskBytes  uint64  `json:"history_disk_bytes"`
	EventBytes uint64  `json:"events_disk_bytes"`
}

// runHistory measures the lineage history (events.History) the daemon
// keeps beside its snapshots: the replay benchmark stream (gen.WriteStream,
// edge list) driven through the timeline with a snapshot every --every of
// event time, each snapshot, its events and the history committed to a
// Pebble store as the daemon does (two full snapshots kept). It reports the
// bytes the history wrote (keys and values, before Pebble's compression),
// per community recorded and snapshot, and the size of the history's key
// family on disk after a compaction.
//
//	shoal-bench history [--events N] [--every D] [--json]
func runHistory(ctx context.Context, args []string, w io.Writer) error {
	fs, _, asJSON := commonFlags("history")
	n := fs.Int("events", 2_600_000, "number of events (one every 0-2 s: 2.6 million is about 30 days)")
	every := fs.Duration("every", time.Hour, "snapshot interval in event time")
	if err := fs.Parse(args); err != nil {
		return err
	}
	var buf bytes.Buffer
	if err := gen.WriteStream(&buf, *n, false); err != nil {
		return err
	}
	dir, err := os.MkdirTemp("", "shoal-bench-history")
	if err != nil {
		return err
	}
	defer os.RemoveAll(dir)
	db, err := pebble.Open(dir, &pebble.Options{Logger: quietLog{}})
	if err != nil {
		return err
	}
	defer db.Close()

	feed := ingest.NewFeed(0)
	tr, err := tracker.New(&tracker.Options{DriftBound: 0.25})
	if err != nil {
		return err
	}
	hist, err := events.NewHistory(&events.HistoryOptions{})
	if err != nil {
		return err
	}
	sink := func(s *snapshot.Snapshot, evs []events.Event, h *events.History) error {
		b := db.NewBatch()
		defer b.Close()
		if err := snapshot.Write(b, s); err != nil {
			return err
		}
		if err := events.PutAll(b, s.ID, evs); err != nil {
			return err
		}
		if err := h.Put(b); err != nil {
			return err
		}
		if _, err := snapshot.Retain(b, db, 2); err != nil {
			return err
		}
		return b.Commit(pebble.NoSync)
	}
	tl, err := timeline.New(timeline.Config{Graph: "bench", Schedule: timeline.Schedule{Every: *every},
		Expire: feed.Window().AppendExpire}, tr, nil, hist, timeline.NewState(), timeline.SinkFunc(sink))
	if err != nil {
		return err
	}
	rd, err := ingest.NewReader(&buf, ingest.ReaderOptions{Name: "stream", Format: ingest.EdgeList, Columns: ingest.ColumnsTime})
	if err != nil {
		return err
	}
	start := time.Now()
	var ev ingest.Event
	var chs []tracker.Change
	var first, last int64
	for i := 0; ; i++ {
		err := rd.Next(&ev)
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			return err
		}
		if i == 0 {
			first = ev.TS
		}
		last = ev.TS
		if err := tl.At(ev.TS); err != nil {
			return err
		}
		chs = feed.Append(chs[:0], &ev, ingest.NoArrival)
		if err := tl.Add(chs); err != nil {
			return err
		}
		if i%65536 == 0 && ctx.Err() != nil {
			return ctx.Err()
		}
	}
	if err := tl.End(); err != nil {
		return err
	}
	sec := time.Since(start).Seconds()
	if err := db.Compact(ctx, []byte{events.HistoryPrefix}, []byte{events.HistoryPrefix + 1}, false); err != nil {
		return err
	}
	hb, err := db.EstimateDiskUsage([]byte{events.HistoryPrefix}, []byte{events.HistoryPrefix + 1})
	if err != nil {
		return err
	}
	if err := db.Compact(ctx, []byte{events.Prefix}, []byte{events.Prefix + 1}, false); err != nil {
		return err
	}
	eb, err := db.EstimateDiskUsage([]byte{events.Prefix}, []byte{events.Prefix + 1})
	if err != nil {
		return err
	}
	st := hist.Stats()
	row := historyRow{Events: *n, Days: float64(last-first) / 86_400_000, Every: every.String(), Snapshots: st.Snapshots,
		Seconds: sec, Points: st.Points, Bytes: st.Bytes, NodeBytes: st.NodeBytes, DiskBytes: hb, EventBytes: eb}
	if st.Snapshots > 0 {
		row.MeanAlive = float64(st.CommunitySnapshots) / float64(st.Snapshots)
	}
	if st.CommunitySnapshots > 0 {
		row.PerCommSn = float64(st.Bytes) / float64(st.CommunitySnapshots)
	}
	em := &emitter{w: w, json: *asJSON}
	em.row(row, "events   days  every  snapshots  seconds  communities  points    written_B   B/comm/snap  node_B      history_disk_B  events_disk_B", func() string {
		return fmt.Sprintf("%-8d %5.1f  %-5s  %9d  %7.1f  %11.0f  %-8d  %-10d  %11.1f  %-10d  %-14d  %d",
			row.Events, row.Days, row.Every, row.Snapshots, row.Seconds, row.MeanAlive, row.Points, row.Bytes, row.PerCommSn, row.NodeBytes, row.DiskBytes, row.EventBytes)
	})
	return nil
}

type quietLog struct{}

func (quietLog) Infof(string, ...any)           {}
func (quietLog) Errorf(string, ...any)          {}
func (quietLog) Fatalf(format string, a ...any) { panic(fmt.Sprintf(format, a...)) }
