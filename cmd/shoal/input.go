package main

import (
	"bufio"
	"flag"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"time"

	"github.com/schollz/progressbar/v3"
	"golang.org/x/term"

	"shoal/ingest"
)

func isTerminal(f *os.File) bool { return term.IsTerminal(int(f.Fd())) }

// inputFlags are the flags every command that reads edge files takes.
type inputFlags struct {
	format, timeUnit, columns *string
}

func addInputFlags(fs *flag.FlagSet) *inputFlags {
	return &inputFlags{
		format:   fs.String("format", "auto", "input format: auto, edge-list or json-lines"),
		timeUnit: fs.String("time-unit", "ms", "unit of numeric times in edge lists: ms or s"),
		columns:  fs.String("columns", "src,dst,w,ts", "edge-list columns: src,dst,w,ts or src,dst,ts (a time and no weight)"),
	}
}

func (f *inputFlags) options(name string) (ingest.LoadOptions, error) {
	var o ingest.LoadOptions
	var err error
	if o.Format, err = ingest.ParseFormat(*f.format); err != nil {
		return o, usageError{err}
	}
	if o.TimeUnit, err = ingest.ParseTimeUnit(*f.timeUnit); err != nil {
		return o, usageError{err}
	}
	if o.Columns, err = ingest.ParseColumns(*f.columns); err != nil {
		return o, usageError{err}
	}
	o.Name = filepath.Base(name)
	if name == "-" {
		o.Name = "stdin"
	}
	return o, nil
}

// loadWithProgress loads an edge file, with a progress bar on stderr when
// stderr is a terminal.
func loadWithProgress(e *env, path string, o ingest.LoadOptions) (*ingest.Loaded, error) {
	if !e.interactive {
		if path == "-" {
			return ingest.Load(e.stdin, o)
		}
		return ingest.LoadFile(path, o)
	}
	size := int64(-1)
	if path != "-" {
		if st, err := os.Stat(path); err == nil {
			size = st.Size()
		}
	}
	bar := progressbar.NewOptions64(size,
		progressbar.OptionSetWriter(e.stderr),
		progressbar.OptionSetDescription("reading "+o.Name),
		progressbar.OptionShowBytes(true),
		progressbar.OptionThrottle(100*time.Millisecond),
		progressbar.OptionClearOnFinish(),
	)
	o.Progress = func(n int64) { _ = bar.Set64(n) }
	var l *ingest.Loaded
	var err error
	if path == "-" {
		l, err = ingest.Load(e.stdin, o)
	} else {
		l, err = ingest.LoadFile(path, o)
	}
	_ = bar.Finish()
	return l, err
}

// spinner shows msg with an elapsed-time counter on stderr while work runs,
// when stderr is a terminal. The returned function stops it and waits.
func spinner(e *env, msg string) (stop func()) {
	if !e.interactive {
		return func() {}
	}
	bar := progressbar.NewOptions(-1,
		progressbar.OptionSetWriter(e.stderr),
		progressbar.OptionSetDescription(msg),
		progressbar.OptionSpinnerType(14),
		progressbar.OptionClearOnFinish(),
	)
	done := make(chan struct{})
	var wg sync.WaitGroup
	wg.Add(1)
	go func() {
		defer wg.Done()
		t := time.NewTicker(100 * time.Millisecond)
		defer t.Stop()
		for {
			select {
			case <-done:
				return
			case <-t.C:
				_ = bar.Add(1)
			}
		}
	}()
	return func() {
		close(done)
		wg.Wait()
		_ = bar.Finish()
	}
}

// writeFileAtomic writes path through a temporary file in the same
// directory, renamed into place only when write succeeds, so a failure
// leaves no partial file.
func writeFileAtomic(path string, write func(w io.Writer) error) error {
	dir := filepath.Dir(path)
	f, err := os.CreateTemp(dir, "."+filepath.Base(path)+".tmp*")
	if err != nil {
		return err
	}
	defer os.Remove(f.Name())
	bw := bufio.NewWriterSize(f, 1<<16)
	if err := write(bw); err != nil {
		f.Close()
		return err
	}
	if err := bw.Flush(); err != nil {
		f.Close()
		return err
	}
	if err := f.Close(); err != nil {
		return err
	}
	if err := os.Rename(f.Name(), path); err != nil {
		return fmt.Errorf("rename into place: %w", err)
	}
	return nil
}

// eachListLine calls fn for every line of r that is neither blank nor a
// # comment, trimmed, with its 1-based line number (the --hubs and
// --node-weights files); it stops at fn's first error.
func eachListLine(r io.Reader, fn func(line int, s string) error) error {
	sc := bufio.NewScanner(r)
	sc.Buffer(make([]byte, 0, 64<<10), 1<<20)
	for line := 1; sc.Scan(); line++ {
		s := strings.TrimSpace(sc.Text())
		if s == "" || s[0] == '#' {
			continue
		}
		if err := fn(line, s); err != nil {
			return err
		}
	}
	return sc.Err()
}
