package ingest

import (
	"errors"
	"sync"

	"shoal/tracker"
)

// ChunkQueue runs a function on chunks of tracker changes in a goroutine
// of its own, one chunk at a time and in the order they were pushed, so
// that the consumer decodes, folds and commits the next batch while the
// tracker works on the last one. The daemon and the ingest benchmark put
// it between ConsumerOptions.Apply and the tracker; Wait catches up before
// anything reads the tracker in the consumer's goroutine (a snapshot).
//
// Push, Wait and Close are called from one goroutine (the consumer's);
// Pending may be called from any.
type ChunkQueue struct {
	fn   func([]tracker.Change) error
	work chan []tracker.Change
	free chan []tracker.Change
	wg   sync.WaitGroup

	mu struct {
		sync.Mutex
		cond    *sync.Cond
		pending int // changes pushed and not yet applied
		chunks  int // chunks pushed and not yet applied
		err     error
	}
	closed bool
}

// ErrQueueClosed is returned by a closed ChunkQueue.
var ErrQueueClosed = errors.New("ingest: chunk queue closed")

// NewChunkQueue starts the goroutine. depth is how many chunks may wait
// (Push blocks beyond it); zero means 4.
func NewChunkQueue(depth int, fn func([]tracker.Change) error) *ChunkQueue {
	if depth <= 0 {
		depth = 4
	}
	q := &ChunkQueue{fn: fn, work: make(chan []tracker.Change, depth), free: make(chan []tracker.Change, depth+1)}
	q.mu.cond = sync.NewCond(&q.mu.Mutex)
	q.wg.Add(1)
	go q.loop()
	return q
}

func (q *ChunkQueue) loop() {
	defer q.wg.Done()
	for chs := range q.work {
		q.mu.Lock()
		failed := q.mu.err != nil
		q.mu.Unlock()
		var err error
		if !failed {
			err = q.fn(chs)
		}
		q.mu.Lock()
		if err != nil && q.mu.err == nil {
			q.mu.err = err
		}
		q.mu.pending -= len(chs)
		q.mu.chunks--
		q.mu.cond.Broadcast()
		q.mu.Unlock()
		select {
		case q.free <- chs[:0]:
		default:
		}
	}
}

// Push queues a copy of chs (the caller may reuse chs at once). It returns
// the error of an earlier chunk, if one failed: from then on nothing more
// is applied.
func (q *ChunkQueue) Push(chs []tracker.Change) error {
	if q.closed {
		return ErrQueueClosed
	}
	q.mu.Lock()
	err := q.mu.err
	q.mu.pending += len(chs)
	q.mu.chunks++
	q.mu.Unlock()
	if err != nil {
		return err
	}
	var buf []tracker.Change
	select {
	case buf = <-q.free:
	default:
	}
	q.work <- append(buf, chs...)
	return nil
}

// Wait blocks until every pushed chunk has been applied and returns the
// first error of fn.
func (q *ChunkQueue) Wait() error {
	q.mu.Lock()
	defer q.mu.Unlock()
	for q.mu.chunks > 0 {
		q.mu.cond.Wait()
	}
	return q.mu.err
}

// Pending returns the number of changes pushed and not yet applied.
func (q *ChunkQueue) Pending() int {
	q.mu.Lock()
	defer q.mu.Unlock()
	return q.mu.pending
}

// Close waits for the queued chunks, stops the goroutine and returns the
// first error of fn. A second call returns ErrQueueClosed.
func (q *ChunkQueue) Close() error {
	if q.closed {
		return ErrQueueClosed
	}
	q.closed = true
	close(q.work)
	q.wg.Wait()
	return q.mu.err
}
