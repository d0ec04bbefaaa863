// Command shoal-bench runs shoal's side-by-side benchmarks: each comparison
// runs in one process, on the same generated graph, against a reference in
// the same run, and prints the ratio. See the README for the figures.
//
//	shoal-bench static [--max-edges N] [--json]
//	shoal-bench incremental [--max-edges N] [--batches K] [--json]
//	shoal-bench accuracy [--n N] [--runs K] [--json]
//	shoal-bench refs [--max-edges N] [--seeds K] [--resolution G] [--python PATH] [--json]
//	shoal-bench ingest|replay|history [options] [--json]
package main

import (
	"context"
	"encoding/json"
	"flag"
	"fmt"
	"io"
	"os"
	"os/signal"
	"syscall"
)

func main() {
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	defer stop()
	if len(os.Args) < 2 {
		usage(os.Stderr)
		os.Exit(2)
	}
	var err error
	switch os.Args[1] {
	case "static":
		err = runStatic(ctx, os.Args[2:], os.Stdout)
	case "incremental":
		err = runIncremental(ctx, os.Args[2:], os.Stdout)
	case "accuracy":
		err = runAccuracy(ctx, os.Args[2:], os.Stdout)
	case "ingest":
		err = runIngest(ctx, os.Args[2:], os.Stdout)
	case "replay":
		err = runReplay(ctx, os.Args[2:], os.Stdout)
	case "history":
		err = runHistory(ctx, os.Args[2:], os.Stdout)
	case "refs":
		err = runRefs(ctx, os.Args[2:], os.Stdout)
	case "refs-peak": // the child process of refs (refs.go, shoalPeak)
		err = runRefsPeak(ctx, os.Args[2:], os.Stdout)
	case "help", "-h", "--help":
		usage(os.Stdout)
		return
	default:
		usage(os.Stderr)
		os.Exit(2)
	}
	if err != nil {
		fmt.Fprintf(os.Stderr, "shoal-bench %s: %v\n", os.Args[1], err)
		os.Exit(1)
	}
}

func usage(w io.Writer) {
	fmt.Fprintln(w, "usage: shoal-bench static|incremental|accuracy|ingest|replay|history|refs [options] [--json]")
}

// emitter prints rows as a table or as JSON lines.
type emitter struct {
	w      io.Writer
	json   bool
	header bool
}

func (e *emitter) row(v any, header string, line func() string) {
	if e.json {
		_ = json.NewEncoder(e.w).Encode(v)
		return
	}
	if !e.header {
		fmt.Fprintln(e.w, header)
		e.header = true
	}
	fmt.Fprintln(e.w, line())
}

func commonFlags(name string) (*flag.FlagSet, *int, *bool) {
	fs := flag.NewFlagSet(name, flag.ContinueOnError)
	maxEdges := fs.Int("max-edges", 1_000_000, "largest graph to generate, in edges")
	asJSON := fs.Bool("json", false, "one JSON object per line instead of a table")
	return fs, maxEdges, asJSON
}
