package main

import (
	"context"
	"fmt"
	"io"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"time"

	"shoal/tracker/gen"
)

// replayRow is one line of `shoal-bench replay`.
type replayRow struct {
	Format  string  `json:"format"`
	Events  int     `json:"events"`
	Args    string  `json:"args"`
	Seconds float64 `json:"seconds"`
	CPU     float64 `json:"cpu_seconds"`
	PerS    float64 `json:"events_per_s"`
}

// runReplay writes a generated stream of edge events and, with --shoal,
// times `shoal replay` on it in a child process (the whole command: read,
// sort check, window, tracker, snapshots, events), once per configuration:
// wall seconds, CPU seconds of the child (user + system, less sensitive to
// other load on a shared machine) and events per wall second.
//
//	shoal-bench replay [--events N] [--out FILE] [--shoal PATH] [--json]
//
// The stream: a planted partition (10^5 nodes in 500 groups, mean degree 8,
// mixing 0.2) whose edges are drawn at random again and again, one event
// every 0 to 2 s from 2023-11-14; in JSON lines 4% of the events remove
// weight 1 from an edge that was added. The same generator (same seeds) as
// BenchmarkReplay in cmd/shoal.
func runReplay(ctx context.Context, args []string, w io.Writer) error {
	fs, _, asJSON := commonFlags("replay")
	n := fs.Int("events", 1_000_000, "number of events to generate")
	out := fs.String("out", "", "write the stream here (default: a temporary directory, removed after)")
	shoal := fs.String("shoal", "", "path of a shoal binary to time on the stream (default: only write it)")
	if err := fs.Parse(args); err != nil {
		return err
	}
	dir, err := os.MkdirTemp("", "shoal-bench-replay")
	if err != nil {
		return err
	}
	defer os.RemoveAll(dir)
	em := &emitter{w: w, json: *asJSON}
	for _, format := range []string{"tsv", "jsonl"} {
		path := filepath.Join(dir, "stream."+format)
		if *out != "" {
			path = *out + "." + format
		}
		if err := writeStream(path, *n, format == "jsonl"); err != nil {
			return err
		}
		if *shoal == "" {
			fmt.Fprintf(w, "wrote %s (%d events)\n", path, *n)
			continue
		}
		configs := [][]string{{"--every", "24h"}, {"--every", "1h"}, {"--every", "24h", "--window", "24h"}}
		for _, extra := range configs {
			cmdArgs := append([]string{"replay", path, "--events-out", filepath.Join(dir, "events.jsonl")}, extra...)
			if format == "tsv" {
				cmdArgs = append(cmdArgs, "--columns", "src,dst,ts")
			}
			cmd := exec.CommandContext(ctx, *shoal, cmdArgs...)
			var errb strings.Builder
			cmd.Stderr = &errb
			start := time.Now()
			if err := cmd.Run(); err != nil {
				return fmt.Errorf("%s %s: %v: %s", *shoal, strings.Join(cmdArgs, " "), err, errb.String())
			}
			sec := time.Since(start).Seconds()
			cpu := (cmd.ProcessState.UserTime() + cmd.ProcessState.SystemTime()).Seconds()
			row := replayRow{Format: format, Events: *n, Args: strings.Join(extra, " "), Seconds: sec, CPU: cpu, PerS: float64(*n) / sec}
			em.row(row, "format  events    seconds  cpu_s  events/s  flags", func() string {
				return fmt.Sprintf("%-7s %-9d %7.2f  %5.2f  %8.0f  %s", row.Format, row.Events, row.Seconds, row.CPU, row.PerS, row.Args)
			})
		}
	}
	return nil
}

func writeStream(path string, n int, jsonl bool) error {
	f, err := os.Create(path)
	if err != nil {
		return err
	}
	if err := gen.WriteStream(f, n, jsonl); err != nil {
		f.Close()
		return err
	}
	return f.Close()
}
