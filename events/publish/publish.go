// Package publish drains the lifecycle events of the store's outbox
// (package events, key family 'v') to NATS JetStream. It is apart from
// package events so that the events, their store and the timeline carry no
// messaging code.
package publish

import (
	"context"
	"fmt"

	"github.com/cockroachdb/pebble/v2"
	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"

	"shoal/events"
)

// Publisher drains the store's outbox (family 'v') to JetStream: each event
// goes to Prefix.<type> with its id as the Nats-Msg-Id, so that the stream
// de-duplicates a re-publish after a crash (within the stream's duplicate
// window), and the published cursor moves on once the server has
// acknowledged every event of a round. Not safe for concurrent use.
type Publisher struct {
	// JS publishes; DB holds the outbox.
	JS jetstream.JetStream
	DB *pebble.DB
	// Prefix is the subject prefix, shoal.events.<graph> in the daemon.
	Prefix string
	// Batch is the number of events per round. Zero means 256.
	Batch int
	// Failpoint, if set, is called with "events-before-mark" after a round
	// is acknowledged and before the cursor moves (crash tests).
	Failpoint func(name string)
}

// HeaderType is the message header that carries the event type.
const HeaderType = "Shoal-Event-Type"

// Publish publishes pending events in key order until none is left, ctx is
// done or an error occurs, and returns how many it published.
func (p *Publisher) Publish(ctx context.Context) (int, error) {
	n := p.Batch
	if n <= 0 {
		n = 256
	}
	total := 0
	for {
		evs, err := events.Pending(p.DB, n)
		if err != nil || len(evs) == 0 {
			return total, err
		}
		futs := make([]jetstream.PubAckFuture, 0, len(evs))
		for i := range evs {
			m := nats.NewMsg(p.Prefix + "." + string(evs[i].Event.Type))
			m.Data = evs[i].Raw
			m.Header.Set(jetstream.MsgIDHeader, evs[i].Event.ID)
			m.Header.Set(HeaderType, string(evs[i].Event.Type))
			f, err := p.JS.PublishMsgAsync(m)
			if err != nil {
				return total, fmt.Errorf("events: publish: %w", err)
			}
			futs = append(futs, f)
		}
		for _, f := range futs {
			select {
			case <-f.Ok():
			case err := <-f.Err():
				return total, fmt.Errorf("events: publish: %w", err)
			case <-ctx.Done():
				return total, ctx.Err()
			}
		}
		if p.Failpoint != nil {
			p.Failpoint("events-before-mark")
		}
		last := evs[len(evs)-1]
		b := p.DB.NewBatch()
		if err := events.MarkPublished(b, last.SnapshotID, last.Index); err != nil {
			b.Close()
			return total, err
		}
		if err := b.Commit(pebble.Sync); err != nil {
			b.Close()
			return total, fmt.Errorf("events: publish: mark: %w", err)
		}
		b.Close()
		total += len(evs)
	}
}
