package main

import (
	"bufio"
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"os"
	"slices"
	"strconv"
	"strings"
	"sync/atomic"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"
	"github.com/schollz/progressbar/v3"

	"shoal/ingest"
)

// publishSummary is what shoal publish reports (stderr, or stdout with
// --json).
type publishSummary struct {
	Subject  string  `json:"subject"`
	Messages int     `json:"messages"`
	Lines    int     `json:"lines"`
	Bytes    int64   `json:"bytes"`
	FirstSeq uint64  `json:"first_seq"`
	LastSeq  uint64  `json:"last_seq"`
	Dups     int     `json:"duplicates"`
	Seconds  float64 `json:"seconds"`
}

// shoal publish FILE|-: send the lines of a file (JSON lines or an edge
// list) to the ingest subject, N lines per message, with JetStream publish
// acks. Blank lines and '#' comment lines are not sent. The lines are sent
// as they are: the daemon validates them (bad ones go to its rejects
// subject), so publish never changes what a producer would send.
func runPublish(ctx context.Context, e *env, args []string) error {
	fs := newFlags(e, "publish", "FILE|- [options]")
	nf := addNATSFlags(fs, nats.DefaultURL, "NATS server URL(s), comma separated")
	graph := fs.String("graph", "default", "graph name: the default subject and stream follow from it")
	subject := fs.String("subject", "", "subject to publish to (default shoal.edges.<graph>)")
	stream := fs.String("stream", "", "ingest stream: it must exist (shoal run creates it), unless --create-stream (default SHOAL_EDGES_<graph>)")
	create := fs.Bool("create-stream", false, "create the ingest stream if it does not exist (as shoal run would), for publishing before the daemon starts")
	perMsg := fs.Int("lines-per-message", 1, "lines per message (a message may carry many events)")
	pending := fs.Int("max-pending", 4096, "largest number of messages waiting for their publish ack")
	idPrefix := fs.String("id-prefix", "", "set the message id PREFIX-<n> (n: message number from 1), so that publishing the same file again within the stream's duplicate window sends nothing twice")
	asJSON := fs.Bool("json", false, "print the summary as JSON on stdout")
	pos, err := parse(fs, args)
	if err != nil {
		return err
	}
	if len(pos) != 1 {
		return usagef("want exactly one FILE (or - for stdin), got %d arguments", len(pos))
	}
	if !ingest.ValidGraphName(*graph) {
		return usagef("--graph %q: want 1..64 letters, digits, '-' or '_'", *graph)
	}
	if *perMsg < 1 || *pending < 1 {
		return usagef("--lines-per-message and --max-pending must be at least 1")
	}
	if err := nf.validate(); err != nil {
		return err
	}
	co := ingest.ConsumerOptions{Graph: *graph, Stream: *stream, Subject: *subject}
	co.EnsureDefaults()

	var in io.Reader = e.stdin
	size := int64(-1)
	if pos[0] != "-" {
		f, err := os.Open(pos[0])
		if err != nil {
			return err
		}
		defer f.Close()
		if st, err := f.Stat(); err == nil {
			size = st.Size()
		}
		in = f
	}
	log := slog.New(slog.NewTextHandler(e.stderr, &slog.HandlerOptions{Level: slog.LevelWarn}))
	nc, err := nf.connect(*nf.url, "shoal publish", log)
	if err != nil {
		return err
	}
	defer nc.Close()
	js, err := jetstream.New(nc, jetstream.WithPublishAsyncMaxPending(*pending))
	if err != nil {
		return err
	}
	if *create {
		if _, err := ingest.EnsureStream(ctx, js, co.StreamConfig()); err != nil {
			return err
		}
	} else if err := streamExists(ctx, js, co); err != nil {
		return err
	}

	var bar *progressbar.ProgressBar
	if e.interactive {
		bar = progressbar.NewOptions64(size,
			progressbar.OptionSetWriter(e.stderr),
			progressbar.OptionSetDescription("publishing"),
			progressbar.OptionShowBytes(true),
			progressbar.OptionThrottle(100*time.Millisecond),
			progressbar.OptionClearOnFinish(),
		)
	}
	start := time.Now()
	sum := publishSummary{Subject: co.Subject}
	var acks ackTally
	rd := bufio.NewReaderSize(in, 1<<20)
	var msg bytes.Buffer
	lines := 0
	send := func() error {
		if lines == 0 {
			return nil
		}
		m := nats.NewMsg(co.Subject)
		m.Data = append([]byte(nil), msg.Bytes()...)
		sum.Messages++
		if *idPrefix != "" {
			m.Header.Set(jetstream.MsgIDHeader, *idPrefix+"-"+strconv.Itoa(sum.Messages))
		}
		f, err := js.PublishMsgAsync(m)
		for errors.Is(err, jetstream.ErrTooManyStalledMsgs) {
			// The server is slower than we are: wait for older acks, then
			// try again.
			if err := acks.settle(ctx, (len(acks.futs)+1)/2); err != nil {
				return err
			}
			f, err = js.PublishMsgAsync(m)
		}
		if err != nil {
			return fmt.Errorf("publish message %d: %w", sum.Messages, err)
		}
		acks.watch(f)
		if len(acks.futs) >= 2**pending {
			// Settle the older half, so memory stays bounded on any input.
			if err := acks.settle(ctx, *pending); err != nil {
				return err
			}
		}
		msg.Reset()
		lines = 0
		return nil
	}
	for {
		if err := ctx.Err(); err != nil {
			return err
		}
		line, rerr := rd.ReadBytes('\n')
		sum.Bytes += int64(len(line))
		if len(line) > 0 {
			text := bytes.TrimRight(line, "\r\n")
			if t := bytes.TrimLeft(text, " \t"); len(t) > 0 && t[0] != '#' {
				if lines > 0 {
					msg.WriteByte('\n')
				}
				msg.Write(text)
				lines++
				sum.Lines++
				if lines == *perMsg {
					if err := send(); err != nil {
						return err
					}
				}
			}
		}
		if bar != nil && sum.Lines%4096 == 0 {
			_ = bar.Set64(sum.Bytes)
		}
		if errors.Is(rerr, io.EOF) {
			break
		}
		if rerr != nil {
			return rerr
		}
	}
	if err := send(); err != nil {
		return err
	}
	select {
	case <-js.PublishAsyncComplete():
	case <-ctx.Done():
		return ctx.Err()
	case <-time.After(60 * time.Second):
		return fmt.Errorf("%d publish acks still missing after 60s", js.PublishAsyncPending())
	}
	if bar != nil {
		_ = bar.Finish()
	}
	if err := acks.settle(ctx, len(acks.futs)); err != nil {
		return err
	}
	sum.FirstSeq, sum.LastSeq, sum.Dups = acks.first.Load(), acks.last.Load(), int(acks.dups.Load())
	sum.Seconds = time.Since(start).Seconds()
	if *asJSON {
		return json.NewEncoder(e.stdout).Encode(sum)
	}
	rate := 0.0
	if sum.Seconds > 0 {
		rate = float64(sum.Messages) / sum.Seconds
	}
	fmt.Fprintf(e.stderr, "published %d messages (%d lines) to %s, stream seq %d..%d, %d duplicates, in %.2fs (%.0f msg/s)\n",
		sum.Messages, sum.Lines, sum.Subject, sum.FirstSeq, sum.LastSeq, sum.Dups, sum.Seconds, rate)
	return nil
}

// ackTally follows the publish acks: the sequence range and the
// duplicates, and the first failure.
type ackTally struct {
	futs  []jetstream.PubAckFuture
	done  int // messages settled
	first atomic.Uint64
	last  atomic.Uint64
	dups  atomic.Int64
}

func (a *ackTally) watch(f jetstream.PubAckFuture) { a.futs = append(a.futs, f) }

// settle waits for the first n acks and forgets them.
func (a *ackTally) settle(ctx context.Context, n int) error {
	for i, f := range a.futs[:n] {
		select {
		case ack := <-f.Ok():
			if ack.Duplicate {
				a.dups.Add(1)
				continue
			}
			if a.first.Load() == 0 || ack.Sequence < a.first.Load() {
				a.first.Store(ack.Sequence)
			}
			if ack.Sequence > a.last.Load() {
				a.last.Store(ack.Sequence)
			}
		case err := <-f.Err():
			return fmt.Errorf("message %d was not stored: %w", a.done+i+1, err)
		case <-ctx.Done():
			return ctx.Err()
		}
	}
	a.done += n
	a.futs = append(a.futs[:0], a.futs[n:]...)
	return nil
}

// streamExists checks that the ingest stream of the graph is on the
// server and takes the subject: publishing into a stream no daemon reads
// would succeed and do nothing, so it is refused (bad usage: exit 2) with
// the flags that fix it.
func streamExists(ctx context.Context, js jetstream.JetStream, co ingest.ConsumerOptions) error {
	rctx, cancel := context.WithTimeout(ctx, 10*time.Second)
	defer cancel()
	st, err := js.Stream(rctx, co.Stream)
	switch {
	case errors.Is(err, jetstream.ErrStreamNotFound):
		return usagef("graph %q: the server has no stream %s; start `shoal run --graph %s` first, or give the daemon's --graph (or --stream), or pass --create-stream to create it now",
			co.Graph, co.Stream, co.Graph)
	case err != nil:
		return fmt.Errorf("stream %s: %w", co.Stream, err)
	}
	if subs := st.CachedInfo().Config.Subjects; !slices.ContainsFunc(subs, func(s string) bool { return subjectMatches(s, co.Subject) }) {
		return usagef("stream %s takes %v, not %s: give the daemon's --subject, or --stream", co.Stream, subs, co.Subject)
	}
	return nil
}

// subjectMatches reports whether subject falls under the stream subject
// pattern (NATS wildcards: * one token, > the rest).
func subjectMatches(pattern, subject string) bool {
	p, s := strings.Split(pattern, "."), strings.Split(subject, ".")
	for i, tok := range p {
		switch {
		case tok == ">":
			return len(s) > i
		case i >= len(s):
			return false
		case tok != "*" && tok != s[i]:
			return false
		}
	}
	return len(p) == len(s)
}
