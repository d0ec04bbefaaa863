// Command shoal tracks communities in graphs that never stop changing. See
// the README for the commands; `shoal help` lists them.
package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"os/signal"
	"syscall"
)

// command is one subcommand of shoal.
type command struct {
	name, summary string
	run           func(ctx context.Context, env *env, args []string) error
}

// env is what a command reads and writes, so tests can run commands in
// process.
type env struct {
	stdin          io.Reader
	stdout, stderr io.Writer
	// interactive is true when stderr is a terminal: progress is shown.
	interactive bool
}

var commands = []command{
	{"detect", "communities of an edge list: modularity, sizes, membership", runDetect},
	{"replay", "stream a time-stamped edge file through the tracker; snapshots and events", runReplay},
	{"diff", "communities of two edge lists and the events between them", runDiff},
	{"run", "the daemon: ingest from NATS JetStream into a durable graph, snapshots, events", runRun},
	{"publish", "send edge events from a file or stdin to the ingest subject", runPublish},
	{"export", "print the stored edges, nodes or a snapshot (daemon stopped)", runExport},
	{"query", "ask a running daemon", runQuery},
	{"demo", "the whole pipeline on an invented payments scenario", runDemo},
}

// usageError marks bad usage or bad input: exit code 2.
type usageError struct{ err error }

func (e usageError) Error() string { return e.err.Error() }
func (e usageError) Unwrap() error { return e.err }

func usagef(format string, a ...any) error { return usageError{fmt.Errorf(format, a...)} }

func main() {
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	defer stop()
	e := &env{stdin: os.Stdin, stdout: os.Stdout, stderr: os.Stderr, interactive: isTerminal(os.Stderr)}
	os.Exit(run(ctx, e, os.Args[1:]))
}

// run executes one command line and returns the exit code: 0 success,
// 1 failure, 2 bad usage or bad input (as the README says).
func run(ctx context.Context, e *env, args []string) int {
	if len(args) == 0 || args[0] == "help" || args[0] == "-h" || args[0] == "--help" {
		printUsage(e.stdout)
		if len(args) == 0 {
			return 2
		}
		return 0
	}
	for _, c := range commands {
		if c.name != args[0] {
			continue
		}
		err := c.run(ctx, e, args[1:])
		switch {
		case err == nil:
			return 0
		case errors.Is(err, flag.ErrHelp):
			return 0
		case isUsage(err):
			fmt.Fprintf(e.stderr, "shoal %s: %v\n", c.name, err)
			return 2
		default:
			fmt.Fprintf(e.stderr, "shoal %s: %v\n", c.name, err)
			return 1
		}
	}
	fmt.Fprintf(e.stderr, "shoal: unknown command %q (see shoal help)\n", args[0])
	return 2
}

func printUsage(w io.Writer) {
	fmt.Fprintln(w, "usage: shoal COMMAND [options]")
	fmt.Fprintln(w)
	for _, c := range commands {
		fmt.Fprintf(w, "  %-8s %s\n", c.name, c.summary)
	}
	fmt.Fprintln(w)
	fmt.Fprintln(w, "shoal COMMAND --help describes the options of a command.")
}

// newFlags returns a flag set that reports errors instead of exiting.
func newFlags(e *env, name, args string) *flag.FlagSet {
	fs := flag.NewFlagSet(name, flag.ContinueOnError)
	fs.SetOutput(e.stderr)
	fs.Usage = func() {
		fmt.Fprintf(e.stderr, "usage: shoal %s %s\n\noptions:\n", name, args)
		fs.PrintDefaults()
	}
	return fs
}

// parse parses flags, allowing them before and after positional arguments,
// and returns the positional arguments.
func parse(fs *flag.FlagSet, args []string) ([]string, error) {
	var pos []string
	for {
		if err := fs.Parse(args); err != nil {
			if errors.Is(err, flag.ErrHelp) {
				return nil, err
			}
			return nil, usageError{err}
		}
		args = fs.Args()
		if len(args) == 0 {
			return pos, nil
		}
		pos = append(pos, args[0])
		args = args[1:]
	}
}
