package ingest

import (
	"cmp"
	"context"
	"errors"
	"fmt"
	"slices"
	"strings"
	"sync"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"

	"shoal/tracker"
)

// Sink receives the tracker changes of every good event, in stream order,
// in the consumer's goroutine, before the batch that holds the event
// commits; what it adds to b commits with it, and so does what it sets in
// st (the daemon keeps the timeline's position there). The daemon's sink is
// the timeline (package events/timeline), which cuts the changes into
// tracker batches and takes the snapshots.
type Sink interface {
	// Before is called before an event at time ts is folded: the window
	// still holds the increments that expire at or before ts.
	Before(b *Batch, ts int64, st *State) error
	// Changes is called with the changes of the event once it is folded
	// (possibly none), and the stream sequence of its message.
	Changes(b *Batch, seq uint64, chs []tracker.Change, st *State) error
	// Idle is called when the stream is idle (nothing pending, or nothing
	// came for IdleApply) after events were folded, and once more with
	// final set when the consumer stops; a commit follows.
	Idle(b *Batch, st *State, final bool) error
}

// CommitInfo describes one committed batch, for [ConsumerOptions.OnCommit].
type CommitInfo struct {
	State State
	// Messages and Events are what the batch applied; Rejects the rejects
	// it added to the outbox; Duplicates the messages at or below the
	// stored sequence that it acknowledged without applying; Snapshots
	// what the callbacks counted in Batch.Snapshots.
	Messages, Events, Rejects, Duplicates, Snapshots int
	// Lag is the number of messages still pending on the consumer after
	// the batch's last message, as the server reported it.
	Lag uint64
}

// ConsumerOptions configure a [Consumer]. Zero fields take the defaults
// given with them.
type ConsumerOptions struct {
	// Graph is the graph name (required).
	Graph string
	// Stream is the ingest stream. Default "SHOAL_EDGES_<graph>".
	Stream string
	// Subject is the ingest subject. Default "shoal.edges.<graph>".
	Subject string
	// Durable is the durable pull consumer. Default "shoal-<graph>".
	Durable string
	// StreamMaxAge and StreamMaxBytes limit the ingest stream when the
	// consumer creates it (0: unlimited); an existing stream is left as it
	// is.
	StreamMaxAge   time.Duration
	StreamMaxBytes int64
	// MaxBatch is the largest number of messages in one batch (one Pebble
	// commit, one ack). Default 1000.
	MaxBatch int
	// MaxBatchEvents ends a batch once it holds this many events (messages
	// that carry many events make big batches; a Pebble batch much larger
	// than a memtable is written as a table of its own). Default 16384.
	MaxBatchEvents int
	// IdleApply: Sink.Idle is called when no message came for this long,
	// even if the server reports more pending. Default 1s. It is also
	// called as soon as the server reports nothing pending.
	IdleApply time.Duration
	// AckWait is the consumer's ack wait. Default 30s.
	AckWait time.Duration
	// Pseudonymizer, if set, replaces ids before anything is stored. The
	// consumer uses copies of it (in its delivery goroutine).
	Pseudonymizer *Pseudonymizer
	// Sink receives the changes (see [Sink]). nil drops them (benchmarks).
	Sink Sink
	// OnCommit is called after every commit (and ack), in the committer
	// goroutine: one call at a time, in commit order.
	OnCommit func(CommitInfo)
	// OnError receives errors the consumer recovers from (a lost
	// connection, a delivery gap that makes it reposition, a failed
	// reposition attempt). nil ignores them.
	OnError func(error)
	// Failpoint, if set, is called with the name of each crash point the
	// consumer passes ("batch-before-commit", "batch-after-commit"), for
	// crash tests. A non-nil error stops the consumer there as a crash
	// would: nothing more is committed or acked, and Run returns it.
	Failpoint func(name string) error
}

// EnsureDefaults fills in the zero fields.
func (o *ConsumerOptions) EnsureDefaults() {
	if o.Stream == "" {
		o.Stream = "SHOAL_EDGES_" + o.Graph
	}
	if o.Subject == "" {
		o.Subject = "shoal.edges." + o.Graph
	}
	if o.Durable == "" {
		o.Durable = "shoal-" + o.Graph
	}
	if o.MaxBatch == 0 {
		o.MaxBatch = 1000
	}
	if o.MaxBatchEvents == 0 {
		o.MaxBatchEvents = 16384
	}
	if o.IdleApply == 0 {
		o.IdleApply = time.Second
	}
	if o.AckWait == 0 {
		o.AckWait = 30 * time.Second
	}
}

// Validate reports every problem at once. Call it after EnsureDefaults.
func (o *ConsumerOptions) Validate() error {
	var errs []error
	if !ValidGraphName(o.Graph) {
		errs = append(errs, fmt.Errorf("graph name %q: want 1..64 letters, digits, '-' or '_'", o.Graph))
	}
	if o.Stream == "" || strings.ContainsAny(o.Stream, ".*> \t") {
		errs = append(errs, fmt.Errorf("stream name %q", o.Stream))
	}
	if o.Durable == "" || strings.ContainsAny(o.Durable, ".*> \t") {
		errs = append(errs, fmt.Errorf("durable name %q", o.Durable))
	}
	if o.Subject == "" || strings.ContainsAny(o.Subject, " \t") {
		errs = append(errs, fmt.Errorf("subject %q", o.Subject))
	}
	if o.MaxBatch < 1 || o.MaxBatchEvents < 1 {
		errs = append(errs, fmt.Errorf("max batch %d or max batch events %d < 1", o.MaxBatch, o.MaxBatchEvents))
	}
	if o.IdleApply < 0 || o.AckWait < time.Second || o.StreamMaxAge < 0 || o.StreamMaxBytes < 0 {
		errs = append(errs, errors.New("durations and limits must be positive (ack wait at least 1s)"))
	}
	if len(errs) > 0 {
		return fmt.Errorf("ingest: consumer options: %w", errors.Join(errs...))
	}
	return nil
}

// ConsumerStats are the consumer's counters, for /v1/stats and metrics.
type ConsumerStats struct {
	// State is the last committed state.
	State State
	// Duplicates counts messages acknowledged without being applied (at or
	// below the stored sequence) since start; Repositions the times the
	// consumer was reset to the stored sequence after a delivery gap.
	Duplicates, Repositions uint64
	// Lag is the number of messages pending on the server after the last
	// message received.
	Lag uint64
	// Consuming is true while the consumer is positioned and receiving.
	Consuming bool
}

// Consumer reads edge events from a JetStream stream into a [Store] through
// a [Feed] and hands the tracker changes to ConsumerOptions.Sink, with the
// exactly-once protocol of doc.go. [Consumer.Run] owns the goroutine that
// does the work; the other methods may be called from any goroutine.
type Consumer struct {
	o     ConsumerOptions
	js    jetstream.JetStream
	store *Store
	feed  *Feed

	// Owned by the Run goroutine.
	st       State // includes the batch being built
	changes  []tracker.Change
	unsent   bool // events were folded since the last Sink.Idle
	batch    *Batch
	edges    []edgeWrite // edge weights to write at commit
	incs     []Increment // window increments to write at commit
	present  []bool
	flipped  []uint32 // nodes whose presence changed in the batch
	written  int      // node ids below this have a record in the store
	lastPend uint64
	expect   uint64 // next consumer (delivery) sequence
	window   bool
	bEvents  int
	bRejects int
	bDups    int
	bMsgs    int
	draining bool // Drain: the subscription does not decode

	// The committer goroutine (started and stopped by Run) commits batches
	// handed to it in jobs and returns them through free.
	jobs     chan commitJob
	free     chan *Batch
	inFlight sync.WaitGroup
	cwg      sync.WaitGroup
	cmu      struct {
		sync.Mutex
		err error
	}

	sub *subscription

	mu struct {
		sync.Mutex
		stats   ConsumerStats
		running bool
	}
}

// NewConsumer returns a consumer over a store, the feed restored from it
// and the presence flags of its nodes (Restored.Present). It does not touch
// the network until Run.
func NewConsumer(js jetstream.JetStream, s *Store, feed *Feed, present []bool, o *ConsumerOptions) (*Consumer, error) {
	oo := *o
	oo.EnsureDefaults()
	if err := oo.Validate(); err != nil {
		return nil, err
	}
	c := &Consumer{
		o:       oo,
		js:      js,
		store:   s,
		feed:    feed,
		st:      s.State(),
		batch:   s.NewBatch(),
		present: append([]bool(nil), present...),
		written: feed.Dict().Len(),
		window:  s.Meta().Window > 0,
	}
	c.mu.stats.State = c.st
	feed.Window().SetObserver(c.observe)
	return c, nil
}

// edgeWrite is an edge weight to write at commit; w < 0 means "look the
// weight up in the window" (the sum of the edge's increments).
type edgeWrite struct {
	key uint64 // u<<32 | v, u <= v: the order of the edge keys
	w   float64
}

// observe records every increment change. Without a window an edge has
// one increment, whose weight is the edge's. With a window the increment is
// recorded and the edge's weight is looked up at commit. The writes are
// sorted by key at commit: Pebble inserts a batch into its memtable in
// batch order, and keys in order reuse the skiplist's search path (about
// 2.3 times cheaper than random order in shoal-bench ingest: 1.2 against
// 2.8 us per key on the reference machine).
func (c *Consumer) observe(inc Increment) {
	if c.window {
		c.incs = append(c.incs, inc)
		c.edges = append(c.edges, edgeWrite{key: edgeKey(inc.U, inc.V), w: -1})
		return
	}
	c.edges = append(c.edges, edgeWrite{key: edgeKey(inc.U, inc.V), w: inc.W})
}

// writeEdges adds the recorded increments and edge weights to the batch in
// key order, the last write of a key winning.
func (c *Consumer) writeEdges() error {
	slices.SortStableFunc(c.incs, func(a, b Increment) int {
		switch {
		case a.Expiry != b.Expiry:
			return cmp.Compare(a.Expiry, b.Expiry)
		case edgeKey(a.U, a.V) != edgeKey(b.U, b.V):
			return cmp.Compare(edgeKey(a.U, a.V), edgeKey(b.U, b.V))
		}
		return cmp.Compare(a.Seq, b.Seq)
	})
	for i := range c.incs {
		if j := i + 1; j < len(c.incs) && c.incs[j].Expiry == c.incs[i].Expiry && c.incs[j].Seq == c.incs[i].Seq &&
			edgeKey(c.incs[j].U, c.incs[j].V) == edgeKey(c.incs[i].U, c.incs[i].V) {
			continue // a later state of the same increment follows
		}
		if err := c.batch.PutIncrement(c.incs[i]); err != nil {
			return err
		}
	}
	slices.SortStableFunc(c.edges, func(a, b edgeWrite) int { return cmp.Compare(a.key, b.key) })
	win := c.feed.Window()
	for i := range c.edges {
		e := &c.edges[i]
		if i+1 < len(c.edges) && c.edges[i+1].key == e.key {
			continue
		}
		u, v := uint32(e.key>>32), uint32(e.key)
		w := e.w
		if w < 0 {
			w = win.Weight(u, v)
		}
		if err := c.batch.PutEdge(u, v, w); err != nil {
			return err
		}
	}
	c.incs, c.edges = c.incs[:0], c.edges[:0]
	return nil
}

// Stats returns the current counters.
func (c *Consumer) Stats() ConsumerStats {
	c.mu.Lock()
	defer c.mu.Unlock()
	return c.mu.stats
}

// Options returns the options with defaults filled in.
func (c *Consumer) Options() ConsumerOptions { return c.o }

var errReposition = errors.New("ingest: delivery gap")

// Run consumes until ctx is done or a fatal error (a failed commit, a
// stream or consumer that cannot be set up as configured). It creates the
// stream and the durable consumer if absent, positions the consumer at the
// stored sequence + 1, and from then on: fetch a batch, decode, fold, write
// it with its state in one synced commit, ack. When ctx is done it stops
// fetching, finishes and commits the batch in hand, calls Sink.Idle with
// final set, commits, and returns nil. Broker outages are
// ridden out: the connection reconnects and the consumer repositions at
// the stored sequence when deliveries were lost.
func (c *Consumer) Run(ctx context.Context) error {
	c.mu.Lock()
	if c.mu.running {
		c.mu.Unlock()
		return errors.New("ingest: consumer already running")
	}
	c.mu.running = true
	c.mu.Unlock()
	c.startCommitter()
	defer func() {
		c.stopCommitter()
		c.mu.Lock()
		c.mu.running = false
		c.mu.stats.Consuming = false
		c.mu.Unlock()
	}()
	err := c.loop(ctx)
	if ctx.Err() != nil && (err == nil || errors.Is(err, context.Canceled) || errors.Is(err, context.DeadlineExceeded)) {
		if err := c.idle(true); err != nil {
			return err
		}
		return c.flush()
	}
	return errors.Join(err, c.flush())
}

func (c *Consumer) loop(ctx context.Context) error {
	if err := retry(ctx, c.o.OnError, func(ctx context.Context) error { return c.setup(ctx) }); err != nil {
		return err
	}
	for {
		if err := retry(ctx, c.o.OnError, func(ctx context.Context) error { return c.position(ctx) }); err != nil {
			return err
		}
		err := c.consume(ctx)
		c.sub.stop()
		c.sub = nil
		c.setConsuming(false)
		// What was handed to the committer must be committed (and acked)
		// before the consumer is moved, and before Run returns.
		if ferr := c.flush(); ferr != nil {
			return ferr
		}
		if ctx.Err() != nil {
			return ctx.Err()
		}
		if errors.Is(err, errReposition) {
			c.report(err)
			c.mu.Lock()
			c.mu.stats.Repositions++
			c.mu.Unlock()
			continue
		}
		return err
	}
}

func (c *Consumer) setConsuming(v bool) {
	c.mu.Lock()
	c.mu.stats.Consuming = v
	c.mu.Unlock()
}

func (c *Consumer) report(err error) {
	if c.o.OnError != nil && err != nil {
		c.o.OnError(err)
	}
}

func (c *Consumer) failpoint(name string) error {
	if c.o.Failpoint != nil {
		return c.o.Failpoint(name)
	}
	return nil
}

func (c *Consumer) fail(err error) {
	c.cmu.Lock()
	if c.cmu.err == nil {
		c.cmu.err = err
	}
	c.cmu.Unlock()
}

// StreamConfig returns the configuration with which the ingest stream is
// created when absent (by the consumer, or by shoal publish): file storage,
// the ingest subject, the limits of o. Call it after EnsureDefaults.
func (o *ConsumerOptions) StreamConfig() jetstream.StreamConfig {
	return jetstream.StreamConfig{
		Name:        o.Stream,
		Description: "shoal edge events of graph " + o.Graph,
		Subjects:    []string{o.Subject},
		Storage:     jetstream.FileStorage,
		MaxAge:      o.StreamMaxAge,
		MaxBytes:    orUnlimited(o.StreamMaxBytes),
		// A producer that sets Nats-Msg-Id (shoal publish --id-prefix) can
		// retry a failed publish within this window without doubling.
		Duplicates: 10 * time.Minute,
	}
}

// setup creates the ingest stream and the durable consumer if absent.
func (c *Consumer) setup(ctx context.Context) error {
	_, err := EnsureStream(ctx, c.js, c.o.StreamConfig())
	if err != nil {
		return err
	}
	rctx, cancel := context.WithTimeout(ctx, 10*time.Second)
	defer cancel()
	_, err = c.js.CreateOrUpdateConsumer(rctx, c.o.Stream, c.consumerConfig())
	if err != nil {
		return fmt.Errorf("ingest: consumer %s on stream %s: %w", c.o.Durable, c.o.Stream, err)
	}
	return nil
}

func orUnlimited(n int64) int64 {
	if n == 0 {
		return -1
	}
	return n
}

func (c *Consumer) consumerConfig() jetstream.ConsumerConfig {
	return jetstream.ConsumerConfig{
		Durable:       c.o.Durable,
		Description:   "shoal ingest of graph " + c.o.Graph,
		FilterSubject: c.o.Subject,
		DeliverPolicy: jetstream.DeliverAllPolicy,
		// One ack per batch: acking its last message acks all before it.
		AckPolicy:     jetstream.AckAllPolicy,
		AckWait:       c.o.AckWait,
		MaxDeliver:    -1,
		MaxAckPending: -1,
	}
}

// EnsureStream returns the stream named cfg.Name, creating it with cfg if
// it does not exist. An existing stream is left as it is.
func EnsureStream(ctx context.Context, js jetstream.JetStream, cfg jetstream.StreamConfig) (jetstream.Stream, error) {
	rctx, cancel := context.WithTimeout(ctx, 10*time.Second)
	defer cancel()
	s, err := js.Stream(rctx, cfg.Name)
	if err == nil {
		return s, nil
	}
	if !errors.Is(err, jetstream.ErrStreamNotFound) {
		return nil, fmt.Errorf("ingest: stream %s: %w", cfg.Name, err)
	}
	s, err = js.CreateStream(rctx, cfg)
	if errors.Is(err, jetstream.ErrStreamNameAlreadyInUse) {
		s, err = js.Stream(rctx, cfg.Name)
	}
	if err != nil {
		return nil, fmt.Errorf("ingest: create stream %s: %w", cfg.Name, err)
	}
	return s, nil
}

// position resets the durable consumer to the stored sequence + 1 and
// starts receiving. The store, not the consumer's own state, says where
// ingest stands: after a crash between commit and ack, or after deliveries
// lost in a broker outage, this is what makes every message count once.
func (c *Consumer) position(ctx context.Context) error {
	from := c.st.Applied + 1
	rctx, cancel := context.WithTimeout(ctx, 10*time.Second)
	defer cancel()
	if _, err := c.js.ResetConsumerToSequence(rctx, c.o.Stream, c.o.Durable, from); err != nil {
		if !errors.Is(err, jetstream.ErrConsumerNotFound) && !isAPIError(err) {
			return fmt.Errorf("ingest: reset consumer %s to %d: %w", c.o.Durable, from, err)
		}
		// Gone, or a server without the reset API: create it afresh at the
		// position.
		if err := c.recreate(rctx, from); err != nil {
			return err
		}
	}
	cons, err := c.js.Consumer(rctx, c.o.Stream, c.o.Durable)
	if err != nil {
		return fmt.Errorf("ingest: consumer %s: %w", c.o.Durable, err)
	}
	c.expect = 1
	var p *Pseudonymizer
	if c.o.Pseudonymizer != nil {
		p = c.o.Pseudonymizer.clone() // one per subscription: not goroutine-safe
	}
	c.sub, err = subscribe(cons, c.o.MaxBatch, !c.draining, p)
	if err != nil {
		return fmt.Errorf("ingest: consume %s: %w", c.o.Durable, err)
	}
	c.setConsuming(true)
	return nil
}

func isAPIError(err error) bool {
	var api *jetstream.APIError
	return errors.As(err, &api)
}

func (c *Consumer) recreate(ctx context.Context, from uint64) error {
	if err := c.js.DeleteConsumer(ctx, c.o.Stream, c.o.Durable); err != nil && !errors.Is(err, jetstream.ErrConsumerNotFound) {
		return fmt.Errorf("ingest: delete consumer %s: %w", c.o.Durable, err)
	}
	cfg := c.consumerConfig()
	if from > 1 {
		cfg.DeliverPolicy = jetstream.DeliverByStartSequencePolicy
		cfg.OptStartSeq = from
	}
	if _, err := c.js.CreateConsumer(ctx, c.o.Stream, cfg); err != nil {
		return fmt.Errorf("ingest: create consumer %s at %d: %w", c.o.Durable, from, err)
	}
	return nil
}

// consume runs batches until ctx is done, a delivery gap or a fatal error.
func (c *Consumer) consume(ctx context.Context) error {
	var msgs []delivery // received, not yet processed
	for {
		if len(msgs) == 0 {
			var err error
			idle := time.Duration(0)
			if c.unsent {
				idle = c.o.IdleApply
			}
			msgs, err = c.sub.next(ctx, msgs[:0], c.o.MaxBatch, idle)
			switch {
			case errors.Is(err, errIdle):
				if err := c.idle(false); err != nil {
					return err
				}
				continue
			case err != nil:
				return err
			}
		}
		n, gap, err := c.process(msgs)
		if err != nil {
			return err
		}
		if gap {
			for i := n; i < len(msgs); i++ {
				msgs[i].release()
			}
			return errReposition
		}
		msgs = msgs[:copy(msgs, msgs[n:])]
		if len(msgs) == 0 && c.lastPend == 0 && c.sub.buffered() == 0 && c.unsent {
			if err := c.idle(false); err != nil {
				return err
			}
		}
	}
}

// process applies a batch of messages, commits and acks, and returns how
// many of msgs it took: it ends the batch early once it holds
// MaxBatchEvents events, and stops at a delivery gap (gap true) after
// committing what came before it.
func (c *Consumer) process(msgs []delivery) (n int, gap bool, err error) {
	var last jetstream.Msg
	for i := range msgs {
		d := &msgs[i]
		if c.bEvents >= c.o.MaxBatchEvents {
			break
		}
		if d.metaErr != nil {
			// Not a JetStream delivery: nothing to ack, nothing to apply.
			n++
			c.report(fmt.Errorf("ingest: message without metadata: %w", d.metaErr))
			continue
		}
		if d.dseq != c.expect {
			c.report(fmt.Errorf("%w: delivery %d where %d was expected (stream seq %d)", errReposition, d.dseq, c.expect, d.seq))
			gap = true
			break
		}
		n++
		c.expect++
		c.lastPend = d.pending
		last = d.m
		if d.seq <= c.st.Applied {
			c.bDups++
			d.release()
			continue
		}
		err := c.apply(d)
		d.release()
		if err != nil {
			return n, false, err
		}
	}
	if last == nil {
		return n, gap, nil
	}
	if err := c.commit(last); err != nil {
		return n, false, err
	}
	return n, gap, nil
}

// apply folds one decoded message (its ids already pseudonymised) into the
// batch being built.
func (c *Consumer) apply(d *delivery) error {
	seq, arrival, events, errs := d.seq, d.arrival, *d.events, d.errs
	if len(events) == 0 && len(errs) == 0 {
		c.st.EventsRejected++
		c.bRejects++
		r := Reject{Seq: seq, Code: CodeEmptyMessage, Reason: "the message holds no event", Raw: append([]byte{}, d.m.Data()...), Time: arrival}
		if c.o.Pseudonymizer != nil {
			r.Raw = nil
		}
		if err := c.batch.PutReject(&r); err != nil {
			return err
		}
	}
	for i := range events {
		ev := &events[i]
		if c.o.Sink != nil {
			if err := c.o.Sink.Before(c.batch, c.feed.EventTime(ev, arrival), &c.st); err != nil {
				return fmt.Errorf("ingest: before event %d of seq %d: %w", i+1, seq, err)
			}
		}
		c.changes = c.feed.Append(c.changes[:0], ev, arrival)
		c.trackPresence(c.changes)
		c.st.EventsApplied++
		c.st.Watermark = c.feed.Watermark()
		c.bEvents++
		c.unsent = true
		if c.o.Sink != nil {
			if err := c.o.Sink.Changes(c.batch, seq, c.changes, &c.st); err != nil {
				return fmt.Errorf("ingest: event %d of seq %d: %w", i+1, seq, err)
			}
		}
	}
	for _, e := range errs {
		c.st.EventsRejected++
		c.bRejects++
		r := Reject{Seq: seq, Line: e.Line, Code: RejectCode(e), Field: e.Field, Reason: e.Error(), Raw: e.Raw, Time: arrival}
		if r.Raw == nil {
			r.Raw = []byte{}
		}
		if c.o.Pseudonymizer != nil {
			r.Reason, r.Raw = "", nil
		}
		if err := c.batch.PutReject(&r); err != nil {
			return err
		}
	}
	c.st.Applied = seq
	c.st.Messages++
	c.st.Watermark = c.feed.Watermark()
	c.bMsgs++
	return nil
}

// trackPresence mirrors in c.present what the tracker will do with the
// changes: an add or set makes both ends present, a node removal absent.
func (c *Consumer) trackPresence(chs []tracker.Change) {
	for _, ch := range chs {
		switch ch.Op {
		case tracker.OpAdd, tracker.OpSet:
			c.setPresent(ch.U, true)
			c.setPresent(ch.V, true)
		case tracker.OpRemoveNode:
			c.setPresent(ch.U, false)
		}
	}
}

func (c *Consumer) setPresent(u uint32, p bool) {
	for int(u) >= len(c.present) {
		c.present = append(c.present, false)
	}
	if c.present[u] != p {
		c.present[u] = p
		if int(u) < c.written {
			c.flipped = append(c.flipped, u)
		}
	}
}

// idle tells the sink that the stream is idle (or, final, that the
// consumer stops) and commits what it wrote.
func (c *Consumer) idle(final bool) error {
	if c.o.Sink != nil {
		if err := c.o.Sink.Idle(c.batch, &c.st, final); err != nil {
			return fmt.Errorf("ingest: idle at seq %d: %w", c.st.Applied, err)
		}
	}
	c.unsent = false
	return c.commit(nil)
}

// commit writes the new nodes, the presence changes, the edges and the
// state into the batch and hands it to the committer goroutine, which
// commits it synced, then acks last (if not nil), then calls OnCommit.
// Meanwhile the consumer builds the next batch in a second one; it waits
// only when the committer still holds both.
func (c *Consumer) commit(last jetstream.Msg) error {
	d := c.feed.Dict()
	for id := c.written; id < d.Len(); id++ {
		if err := c.batch.PutNode(uint32(id), d.Name(uint32(id)), id < len(c.present) && c.present[id]); err != nil {
			return err
		}
	}
	for _, u := range c.flipped {
		if err := c.batch.PutNode(u, d.Name(u), c.present[u]); err != nil {
			return err
		}
	}
	if err := c.writeEdges(); err != nil {
		return err
	}
	if err := c.batch.PutState(&c.st); err != nil {
		return err
	}
	c.written = d.Len()
	c.flipped = c.flipped[:0]
	job := commitJob{b: c.batch, st: c.st, last: last,
		info: CommitInfo{State: c.st, Messages: c.bMsgs, Events: c.bEvents, Rejects: c.bRejects, Duplicates: c.bDups, Lag: c.lastPend, Snapshots: c.batch.Snapshots}}
	c.bMsgs, c.bEvents, c.bRejects, c.bDups = 0, 0, 0, 0
	if err := c.commitErr(); err != nil {
		return err
	}
	c.inFlight.Add(1)
	c.jobs <- job
	c.batch = <-c.free
	return c.commitErr()
}

// commitJob is one batch on its way to the disk.
type commitJob struct {
	b    *Batch
	st   State
	last jetstream.Msg
	info CommitInfo
}

func (c *Consumer) startCommitter() {
	c.jobs = make(chan commitJob, 1)
	c.free = make(chan *Batch, 1)
	c.free <- c.store.NewBatch()
	c.cwg.Add(1)
	go func() {
		defer c.cwg.Done()
		for job := range c.jobs {
			c.runJob(job)
			c.inFlight.Done()
		}
	}()
}

func (c *Consumer) stopCommitter() {
	close(c.jobs)
	c.cwg.Wait()
}

// runJob commits one batch (committer goroutine). After a failure nothing
// more is committed: the consumer returns the error, and the daemon exits
// and restarts from what is on disk.
func (c *Consumer) runJob(job commitJob) {
	defer func() {
		job.b.Reset()
		job.b.Snapshots = 0
		c.free <- job.b
	}()
	if c.commitErr() != nil {
		return
	}
	if err := c.failpoint("batch-before-commit"); err != nil {
		c.fail(err)
		return
	}
	if err := c.store.Commit(job.b, &job.st); err != nil {
		c.fail(err)
		return
	}
	if err := c.failpoint("batch-after-commit"); err != nil {
		c.fail(err)
		return
	}
	// AckAll: this acks every message of the batch. A lost ack only means
	// a redelivery, which is skipped as at or below the stored sequence.
	if job.last != nil {
		if err := job.last.Ack(); err != nil {
			c.report(fmt.Errorf("ingest: ack: %w", err))
		}
	}
	c.mu.Lock()
	c.mu.stats.State = job.st
	c.mu.stats.Duplicates += uint64(job.info.Duplicates)
	c.mu.stats.Lag = job.info.Lag
	c.mu.Unlock()
	if c.o.OnCommit != nil {
		c.o.OnCommit(job.info)
	}
}

func (c *Consumer) commitErr() error {
	c.cmu.Lock()
	defer c.cmu.Unlock()
	return c.cmu.err
}

// flush waits until every batch handed to the committer is committed and
// acked, and returns the commit error if there was one.
func (c *Consumer) flush() error {
	c.inFlight.Wait()
	return c.commitErr()
}

// Drain receives n messages from stream sequence from on through the same
// subscription, batching and acks as Run, and does nothing with them; it
// measures the raw rate of the consumer (cmd/shoal-bench ingest). It
// leaves the store alone.
func (c *Consumer) Drain(ctx context.Context, from uint64, n int) error {
	if err := c.setup(ctx); err != nil {
		return err
	}
	saved := c.st.Applied
	c.st.Applied = from - 1
	c.draining = true
	err := c.position(ctx)
	c.st.Applied = saved
	c.draining = false
	if err != nil {
		return err
	}
	defer func() { c.sub.stop(); c.sub = nil }()
	var msgs []delivery
	for got := 0; got < n; {
		var err error
		msgs, err = c.sub.next(ctx, msgs[:0], c.o.MaxBatch, 0)
		if err != nil {
			return err
		}
		var last jetstream.Msg
		for _, d := range msgs {
			if d.metaErr != nil {
				continue
			}
			if d.dseq != c.expect {
				return fmt.Errorf("%w during drain", errReposition)
			}
			c.expect++
			last = d.m
			got++
		}
		if last != nil {
			if err := last.Ack(); err != nil {
				return err
			}
		}
	}
	return nil
}

// retry calls fn until it succeeds, ctx is done, or it fails with an error
// that waiting will not cure; between attempts it backs off from 100ms to
// 5s.
func retry(ctx context.Context, onErr func(error), fn func(context.Context) error) error {
	wait := 100 * time.Millisecond
	for {
		err := fn(ctx)
		if err == nil {
			return nil
		}
		if ctx.Err() != nil {
			return ctx.Err()
		}
		if !transient(err) {
			return err
		}
		if onErr != nil {
			onErr(fmt.Errorf("%w (retrying in %v)", err, wait))
		}
		t := time.NewTimer(wait)
		select {
		case <-ctx.Done():
			t.Stop()
			return ctx.Err()
		case <-t.C:
		}
		wait = min(2*wait, 5*time.Second)
	}
}

// transient reports whether err is about the server being away or busy
// rather than about the configuration.
func transient(err error) bool {
	switch {
	case errors.Is(err, context.DeadlineExceeded),
		errors.Is(err, nats.ErrTimeout),
		errors.Is(err, nats.ErrNoResponders),
		errors.Is(err, nats.ErrDisconnected),
		errors.Is(err, nats.ErrConnectionReconnecting),
		errors.Is(err, jetstream.ErrNoStreamResponse),
		errors.Is(err, jetstream.ErrJetStreamNotEnabled),
		errors.Is(err, jetstream.ErrJetStreamNotEnabledForAccount):
		return true
	}
	var api *jetstream.APIError
	if errors.As(err, &api) {
		// 503: JetStream temporarily unavailable (no quorum, starting up).
		return api.Code == 503
	}
	return false
}

var errIdle = errors.New("ingest: idle")

// delivery is one received message, already parsed and decoded in the
// subscription's goroutine (see subscribe).
type delivery struct {
	m        jetstream.Msg
	dseq     uint64 // consumer (delivery) sequence
	seq      uint64 // stream sequence
	pending  uint64 // messages still pending on the consumer
	arrival  int64  // stream time stamp, Unix ms
	metaErr  error
	decoded  bool
	events   *[]Event
	errs     []*DecodeError
	dataSize int
}

// eventBufs recycles the event slices of deliveries.
var eventBufs = sync.Pool{New: func() any { s := make([]Event, 0, 8); return &s }}

// subscription is one incarnation of the pull subscription: the library's
// Consume callback parses the metadata, decodes the message (and
// pseudonymises its ids) in the library's delivery goroutine, so that this
// work runs beside the fold, and feeds a buffered channel that the Run
// goroutine reads in batches. A new one is made at every (re)position, so
// that deliveries to an old one can never be mistaken for new ones.
type subscription struct {
	cc   jetstream.ConsumeContext
	ch   chan delivery
	quit chan struct{}
}

// subscribe starts a subscription. With decode false (Drain) messages are
// not decoded. p, if not nil, is used by the delivery goroutine only.
func subscribe(cons jetstream.Consumer, batch int, decode bool, p *Pseudonymizer) (*subscription, error) {
	s := &subscription{ch: make(chan delivery, 2*batch), quit: make(chan struct{})}
	cc, err := cons.Consume(func(m jetstream.Msg) {
		d := delivery{m: m}
		meta, err := m.Metadata()
		if err != nil {
			d.metaErr = err
		} else {
			d.dseq, d.seq, d.pending, d.arrival = meta.Sequence.Consumer, meta.Sequence.Stream, meta.NumPending, meta.Timestamp.UnixMilli()
		}
		if decode && err == nil {
			buf := eventBufs.Get().(*[]Event)
			*buf, d.errs = DecodeMessage(m.Data(), *buf)
			if p != nil {
				for i := range *buf {
					p.Apply(&(*buf)[i])
				}
			}
			d.events, d.decoded, d.dataSize = buf, true, len(m.Data())
		}
		select {
		case s.ch <- d:
		case <-s.quit:
		}
	}, jetstream.PullMaxMessages(batch))
	if err != nil {
		return nil, err
	}
	s.cc = cc
	return s, nil
}

// release returns a delivery's event slice to the pool.
func (d *delivery) release() {
	if d.events != nil {
		if cap(*d.events) <= 4096 {
			clear(*d.events)
			*d.events = (*d.events)[:0]
			eventBufs.Put(d.events)
		}
		d.events = nil
	}
}

// stop ends the subscription and waits for the library to let go of it.
func (s *subscription) stop() {
	if s == nil {
		return
	}
	close(s.quit)
	s.cc.Stop()
	select {
	case <-s.cc.Closed():
	case <-time.After(5 * time.Second):
	}
}

func (s *subscription) buffered() int { return len(s.ch) }

// next waits for a first message (at most idle, if idle > 0, after which it
// returns errIdle), then takes what is already there, up to max.
func (s *subscription) next(ctx context.Context, dst []delivery, max int, idle time.Duration) ([]delivery, error) {
	var timeout <-chan time.Time
	if idle > 0 {
		t := time.NewTimer(idle)
		defer t.Stop()
		timeout = t.C
	}
	select {
	case m := <-s.ch:
		dst = append(dst, m)
	case <-ctx.Done():
		return dst, ctx.Err()
	case <-timeout:
		return dst, errIdle
	}
	for len(dst) < max {
		select {
		case m := <-s.ch:
			dst = append(dst, m)
		default:
			return dst, nil
		}
	}
	return dst, nil
}
