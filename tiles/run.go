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
}

// Run processes tiles with opts.Workers workers made by open, and calls
// deliver with each tile's result strictly in the order of tiles, so that
// whatever deliver merges is independent of the worker count. At most
// 2 x workers results wait for delivery at any time, which bounds memory.
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
	tickets := make(chan struct{}, 2*workers)
	for range cap(tickets) {
		tickets <- struct{}{}
	}
	next := make(chan int)
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
			for pos := range next {
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
