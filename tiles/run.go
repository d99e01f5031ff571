package tiles

import (
	"context"
	"errors"
	"runtime"
	"sync"
)

// Worker is the per-goroutine side of a run: Do processes one tile and
// returns its result; Close releases what the worker holds (a GDAL dataset
// handle, buffers). A Worker is only ever used by one goroutine.
type Worker[R any] interface {
	Do(ctx context.Context, t Tile) (R, error)
	Close() error
}

// Options tune Run.
type Options struct {
	// Workers is the number of goroutines; 0 means runtime.NumCPU().
	Workers int
	// Progress, when set, is called after each tile's result is delivered
	// with the number of tiles delivered so far and the total. It runs on
	// the delivering goroutine.
	Progress func(done, total int)
	// Ahead is how many tiles beyond the one it works on a worker that
	// implements Lookahead is given in advance (0: none).
	Ahead int
}

// Lookahead is implemented by a Worker that can start on its next tiles
// before Do is called for them, typically reading them (see Prefetch).
// With Options.Ahead > 0, Run calls Ahead with each tile a worker will be
// given, up to Options.Ahead of them before their Do, and calls Do for
// them in that order. Ahead runs on the worker's goroutine and must not
// block for long.
type Lookahead interface {
	Ahead(t Tile)
}

// Run processes tiles with opts.Workers workers made by open, and calls
// deliver with each tile's result strictly in the order of tiles, so that
// whatever deliver merges is independent of the worker count. At most
// (2 + opts.Ahead) x workers tiles are in a worker's hands (being worked on
// or given in advance) or wait for delivery at any time, which bounds
// memory.
//
// Run stops at the first error from open, Do, deliver or Close, or when ctx
// is cancelled, and returns that error (ctx.Err() for cancellation) after
// every worker has been closed.
func Run[R any](ctx context.Context, tiles []Tile, opts Options, open func(worker int) (Worker[R], error), deliver func(Tile, R) error) error {
	workers := opts.Workers
	if workers <= 0 {
		workers = runtime.NumCPU()
	}
	workers = max(1, min(workers, len(tiles)))
	if len(tiles) == 0 {
		return ctx.Err()
	}
	parent := ctx
	ctx, cancel := context.WithCancelCause(ctx)
	defer cancel(nil)

	type result struct {
		pos int
		val R
	}
	// Tickets bound the number of tiles in flight or waiting: a worker takes
	// one before it starts a tile, the deliverer gives it back after
	// delivering that tile.
	tickets := make(chan struct{}, (2+max(opts.Ahead, 0))*workers)
	for range cap(tickets) {
		tickets <- struct{}{}
	}
	// With look-ahead the positions wait in a buffer (as many as there
	// are tickets), so that a worker finds its next ones ready without
	// waiting: handed over one at a time, a position was rarely ready
	// when a worker looked, just after taking the one before.
	buffered := 0
	if opts.Ahead > 0 {
		buffered = cap(tickets)
	}
	next := make(chan int, buffered)
	results := make(chan result, 2*workers)

	var (
		wg        sync.WaitGroup
		mu        sync.Mutex
		firstErr  error
		closeErrs []error
	)
	fail := func(err error) {
		mu.Lock()
		if firstErr == nil {
			firstErr = err
		}
		mu.Unlock()
		cancel(err)
	}

	for w := range workers {
		wg.Add(1)
		go func() {
			defer wg.Done()
			wk, err := open(w)
			if err != nil {
				fail(err)
				return
			}
			defer func() {
				if err := wk.Close(); err != nil {
					mu.Lock()
					closeErrs = append(closeErrs, err)
					mu.Unlock()
				}
			}()
			q := queue{next: next, ahead: opts.Ahead}
			q.la, _ = wk.(Lookahead)
			for pos, ok := q.take(tiles); ok && ctx.Err() == nil; pos, ok = q.take(tiles) {
				val, err := wk.Do(ctx, tiles[pos])
				if err != nil {
					fail(err)
					return
				}
				select {
				case results <- result{pos, val}:
				case <-ctx.Done():
					return
				}
			}
		}()
	}

	// Producer: hands out tile positions in order, one per ticket.
	go func() {
		defer close(next)
		for pos := range tiles {
			select {
			case <-tickets:
			case <-ctx.Done():
				return
			}
			select {
			case next <- pos:
			case <-ctx.Done():
				return
			}
		}
	}()

	// Deliverer: this goroutine, in tile order.
	pending := make(map[int]R, 2*workers)
	done := 0
	allDone := make(chan struct{})
	go func() { wg.Wait(); close(allDone) }()
deliver:
	for done < len(tiles) {
		select {
		case r := <-results:
			pending[r.pos] = r.val
			for {
				val, ok := pending[done]
				if !ok {
					break
				}
				delete(pending, done)
				if err := deliver(tiles[done], val); err != nil {
					fail(err)
					break deliver
				}
				done++
				tickets <- struct{}{}
				if opts.Progress != nil {
					opts.Progress(done, len(tiles))
				}
			}
		case <-ctx.Done():
			break deliver
		case <-allDone:
			// Workers are gone; drain what they left, then stop if short.
			if len(results) == 0 && done < len(tiles) {
				break deliver
			}
		}
	}
	cancel(nil)
	<-allDone
	switch {
	case firstErr != nil:
		return firstErr
	case done < len(tiles):
		return parent.Err()
	default:
		return errors.Join(closeErrs...)
	}
}

// queue is a worker's share of the tile positions the producer hands out:
// the one it works on next and, for a Lookahead worker, up to ahead more,
// each announced to it as it is taken from next.
type queue struct {
	next  <-chan int
	la    Lookahead
	ahead int
	pos   []int
}

// take returns the position to work on next, false when there is none
// left. It waits for one when it holds none; then, for a Lookahead
// worker, it takes further positions that are ready at once (without
// waiting, so as not to hold up the work at hand) up to ahead beyond it.
func (q *queue) take(tiles []Tile) (int, bool) {
	if len(q.pos) == 0 {
		pos, ok := <-q.next
		if !ok {
			return 0, false
		}
		q.push(pos, tiles)
	}
	for q.la != nil && len(q.pos) <= q.ahead {
		pos, ok := q.poll()
		if !ok {
			break
		}
		q.push(pos, tiles)
	}
	return q.pop(), true
}

// poll returns a position if one is ready now.
func (q *queue) poll() (int, bool) {
	select {
	case pos, ok := <-q.next:
		return pos, ok
	default:
		return 0, false
	}
}

func (q *queue) push(pos int, tiles []Tile) {
	q.pos = append(q.pos, pos)
	if q.la != nil && q.ahead > 0 {
		q.la.Ahead(tiles[pos])
	}
}

func (q *queue) pop() int {
	pos := q.pos[0]
	q.pos = q.pos[1:]
	return pos
}
