package timeline

import (
	"errors"
	"sync"

	"shoal/tracker"
)

// queue runs a function on batches of tracker changes in a goroutine of
// its own, one batch at a time and in the order they were pushed, so that
// the timeline's owner (the daemon's consumer) decodes, folds and commits
// the next events while the tracker works on the last batch (Config.Async).
// wait catches up before a snapshot reads the tracker.
//
// push, wait and close are called from the timeline's owner goroutine;
// pending may be called from any.
type queue struct {
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

// errQueueClosed is returned by a closed queue.
var errQueueClosed = errors.New("timeline: batch queue closed")

// newQueue starts the goroutine. depth is how many chunks may wait
// (push blocks beyond it); zero means 4.
func newQueue(depth int, fn func([]tracker.Change) error) *queue {
	if depth <= 0 {
		depth = 4
	}
	q := &queue{fn: fn, work: make(chan []tracker.Change, depth), free: make(chan []tracker.Change, depth+1)}
	q.mu.cond = sync.NewCond(&q.mu.Mutex)
	q.wg.Add(1)
	go q.loop()
	return q
}

func (q *queue) loop() {
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

// push queues a copy of chs (the caller may reuse chs at once). It returns
// the error of an earlier chunk, if one failed: from then on nothing more
// is applied.
func (q *queue) push(chs []tracker.Change) error {
	if q.closed {
		return errQueueClosed
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

// wait blocks until every pushed chunk has been applied and returns the
// first error of fn.
func (q *queue) wait() error {
	q.mu.Lock()
	defer q.mu.Unlock()
	for q.mu.chunks > 0 {
		q.mu.cond.Wait()
	}
	return q.mu.err
}

// pending returns the number of changes pushed and not yet applied.
func (q *queue) pending() int {
	q.mu.Lock()
	defer q.mu.Unlock()
	return q.mu.pending
}

// close waits for the queued chunks, stops the goroutine and returns the
// first error of fn. A second call returns errQueueClosed.
func (q *queue) close() error {
	if q.closed {
		return errQueueClosed
	}
	q.closed = true
	close(q.work)
	q.wg.Wait()
	return q.mu.err
}
