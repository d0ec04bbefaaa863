package ingest

import (
	"context"
	"encoding/binary"
	"errors"
	"fmt"
	"strconv"
	"strings"
	"time"

	"github.com/cockroachdb/pebble/v2"
	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"
)

// Reject codes: one per decode sentinel, plus the message-level faults the
// consumer finds. They are the value of the Shoal-Reject-Code header.
const (
	CodeEmptyMessage = "empty_message"
	CodeNotJetStream = "not_jetstream"
)

var codes = []struct {
	err  error
	code string
}{
	{ErrSyntax, "syntax"},
	{ErrUnknownOp, "unknown_op"},
	{ErrUnknownField, "unknown_field"},
	{ErrMissingField, "missing_field"},
	{ErrEmptyID, "empty_id"},
	{ErrIDTooLong, "id_too_long"},
	{ErrBadWeight, "bad_weight"},
	{ErrBadTime, "bad_time"},
	{ErrBadEncoding, "bad_encoding"},
	{ErrLineTooLong, "line_too_long"},
}

// RejectCode returns the short code of a decode error's sentinel
// ("syntax", "bad_weight", ...), "invalid" for anything else.
func RejectCode(err error) string {
	for _, c := range codes {
		if errors.Is(err, c.err) {
			return c.code
		}
	}
	return "invalid"
}

// Reject is one rejected line (or a whole message, Line 0) waiting in the
// store's rejects outbox (family 'r') to be published.
type Reject struct {
	// Seq is the stream sequence of the message; Line the 1-based line
	// within it, 0 for a fault of the whole message.
	Seq  uint64
	Line int
	// Code is the reject code (RejectCode), Field the field at fault.
	Code, Field string
	// Reason says what is wrong. Raw is the line's bytes (the message's
	// for Line 0). With pseudonymisation both are left empty in the store,
	// since they may hold raw ids, and are recomputed from the ingest
	// stream when the reject is published.
	Reason string
	Raw    []byte
	// Time is the message's stream time stamp, Unix ms.
	Time int64
}

const rejectVersion = 1

func appendRejectKey(dst []byte, seq uint64, line int) []byte {
	dst = binary.BigEndian.AppendUint64(append(dst, prefixReject), seq)
	return binary.BigEndian.AppendUint32(dst, uint32(line))
}

func appendString(dst []byte, s []byte) []byte {
	return append(binary.AppendUvarint(dst, uint64(len(s))), s...)
}

func (r *Reject) encode(dst []byte) []byte {
	dst = append(dst, rejectVersion)
	dst = appendString(dst, []byte(r.Code))
	dst = appendString(dst, []byte(r.Field))
	dst = appendString(dst, []byte(r.Reason))
	dst = appendString(dst, r.Raw)
	return binary.AppendVarint(dst, r.Time)
}

func decodeReject(k, v []byte) (Reject, error) {
	var r Reject
	if len(k) != 13 || len(v) < 1 || v[0] != rejectVersion {
		return r, fmt.Errorf("%w: reject record", ErrStoreCorrupt)
	}
	r.Seq = binary.BigEndian.Uint64(k[1:])
	r.Line = int(binary.BigEndian.Uint32(k[9:]))
	v = v[1:]
	var parts [4][]byte
	for i := range parts {
		n, k := binary.Uvarint(v)
		if k <= 0 || uint64(len(v)-k) < n {
			return r, fmt.Errorf("%w: reject record %d/%d truncated", ErrStoreCorrupt, r.Seq, r.Line)
		}
		parts[i] = v[k : k+int(n)]
		v = v[k+int(n):]
	}
	t, n := binary.Varint(v)
	if n <= 0 || n != len(v) {
		return r, fmt.Errorf("%w: reject record %d/%d time", ErrStoreCorrupt, r.Seq, r.Line)
	}
	r.Code, r.Field, r.Reason = string(parts[0]), string(parts[1]), string(parts[2])
	if len(parts[3]) > 0 {
		r.Raw = append([]byte(nil), parts[3]...)
	}
	r.Time = t
	return r, nil
}

// PutReject adds a reject to the outbox.
func (b *Batch) PutReject(r *Reject) error {
	b.key = appendRejectKey(b.key[:0], r.Seq, r.Line)
	b.val = r.encode(b.val[:0])
	if err := b.b.Set(b.key, b.val, nil); err != nil {
		return fmt.Errorf("ingest: batch: reject %d/%d: %w", r.Seq, r.Line, err)
	}
	return nil
}

// PendingRejects returns up to max (all if max <= 0) rejects of the
// outbox in (Seq, Line) order.
func (s *Store) PendingRejects(max int) ([]Reject, error) {
	var out []Reject
	errStop := errors.New("stop")
	err := scan(s.db, prefixReject, func(k, v []byte) error {
		if max > 0 && len(out) >= max {
			return errStop
		}
		r, err := decodeReject(k, v)
		if err != nil {
			return err
		}
		out = append(out, r)
		return nil
	})
	if err != nil && !errors.Is(err, errStop) {
		return nil, err
	}
	return out, nil
}

// Reject message headers. The body of a reject message is the rejected
// line as it came (the whole message for Line 0).
const (
	HeaderGraph  = "Shoal-Graph"
	HeaderSeq    = "Shoal-Stream-Seq"
	HeaderLine   = "Shoal-Line"
	HeaderCode   = "Shoal-Reject-Code"
	HeaderField  = "Shoal-Field"
	HeaderReason = "Shoal-Reason"
	HeaderTime   = "Shoal-Time"
	// HeaderRawMissing is set (to "true") when the original bytes could not
	// be read back from the ingest stream (pseudonymised store, message
	// gone by the stream's retention): the body is then empty.
	HeaderRawMissing = "Shoal-Raw-Missing"
)

// RejectPublisher drains the rejects outbox to a subject (a JetStream
// stream should capture it), with the message id graph.seq.line so that a
// re-publish after a crash is de-duplicated, and deletes what the server
// acknowledged. Not safe for concurrent use; the daemon runs one.
type RejectPublisher struct {
	// JS publishes; Store holds the outbox.
	JS    jetstream.JetStream
	Store *Store
	// Graph and Subject: the graph name and the rejects subject
	// (shoal.rejects.<graph> by default in the daemon).
	Graph, Subject string
	// Source reads a message back from the ingest stream by sequence, for
	// rejects stored without their bytes (pseudonymisation). nil: publish
	// such rejects without a body.
	Source func(ctx context.Context, seq uint64) ([]byte, error)
	// Pseudonymized: the store holds no raw bytes; reasons are recomputed
	// from the message read back.
	Pseudonymized bool
	// Batch is the number of rejects published per round. Zero means 256.
	Batch int
}

// Publish publishes pending rejects until the outbox is empty, ctx is done
// or an error occurs, and returns how many it published.
func (p *RejectPublisher) Publish(ctx context.Context) (int, error) {
	n := p.Batch
	if n <= 0 {
		n = 256
	}
	total := 0
	for {
		rs, err := p.Store.PendingRejects(n)
		if err != nil || len(rs) == 0 {
			return total, err
		}
		msgs := make([]*nats.Msg, len(rs))
		var lastSeq uint64
		var lastData []byte
		for i := range rs {
			r := &rs[i]
			if r.Raw == nil && p.Source != nil {
				if r.Seq != lastSeq || lastData == nil {
					lastSeq = r.Seq
					lastData, err = p.Source(ctx, r.Seq)
					if err != nil && ctx.Err() != nil {
						return total, ctx.Err()
					}
					if err != nil {
						lastData = nil
					}
				}
				fillReject(r, lastData)
			}
			msgs[i] = p.message(r)
		}
		if err := PublishAll(ctx, p.JS, msgs); err != nil {
			return total, fmt.Errorf("ingest: publish rejects: %w", err)
		}
		b := p.Store.db.NewBatch()
		var key []byte
		for i := range rs {
			key = appendRejectKey(key[:0], rs[i].Seq, rs[i].Line)
			if err := b.Delete(key, nil); err != nil {
				b.Close()
				return total, fmt.Errorf("ingest: publish rejects: %w", err)
			}
		}
		if err := b.Commit(pebble.Sync); err != nil {
			b.Close()
			return total, fmt.Errorf("ingest: publish rejects: %w", err)
		}
		b.Close()
		total += len(rs)
	}
}

// fillReject recomputes the bytes and reason of r from the message data
// (nil if it could not be read back).
func fillReject(r *Reject, data []byte) {
	if data == nil {
		return
	}
	if r.Line == 0 {
		r.Raw = data
		return
	}
	_, errs := DecodeMessage(data, nil)
	for _, e := range errs {
		if e.Line == r.Line {
			r.Raw, r.Reason = e.Raw, e.Error()
			return
		}
	}
}

func (p *RejectPublisher) message(r *Reject) *nats.Msg {
	m := nats.NewMsg(p.Subject)
	m.Data = r.Raw
	h := m.Header
	h.Set(jetstream.MsgIDHeader, p.Graph+"."+strconv.FormatUint(r.Seq, 10)+"."+strconv.Itoa(r.Line))
	h.Set(HeaderGraph, p.Graph)
	h.Set(HeaderSeq, strconv.FormatUint(r.Seq, 10))
	h.Set(HeaderLine, strconv.Itoa(r.Line))
	h.Set(HeaderCode, r.Code)
	if r.Field != "" {
		h.Set(HeaderField, r.Field)
	}
	reason := r.Reason
	if reason == "" && r.Raw == nil {
		reason = r.Code
	}
	h.Set(HeaderReason, headerSafe(reason))
	h.Set(HeaderTime, time.UnixMilli(r.Time).UTC().Format(time.RFC3339Nano))
	if r.Raw == nil {
		h.Set(HeaderRawMissing, "true")
	}
	return m
}

// headerSafe keeps a header value on one line.
func headerSafe(s string) string {
	return strings.Map(func(r rune) rune {
		if r == '\r' || r == '\n' {
			return ' '
		}
		return r
	}, s)
}

// PublishAll publishes msgs asynchronously and waits until the server has
// acknowledged every one; it returns the first failure. A message carrying
// a Nats-Msg-Id that the stream has seen within its duplicate window is
// acknowledged as a duplicate, which counts as published.
func PublishAll(ctx context.Context, js jetstream.JetStream, msgs []*nats.Msg) error {
	futs := make([]jetstream.PubAckFuture, 0, len(msgs))
	for _, m := range msgs {
		f, err := js.PublishMsgAsync(m)
		if err != nil {
			return err
		}
		futs = append(futs, f)
	}
	for _, f := range futs {
		select {
		case <-f.Ok():
		case err := <-f.Err():
			return err
		case <-ctx.Done():
			return ctx.Err()
		}
	}
	return nil
}
