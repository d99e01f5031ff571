package tiles

import (
	"context"
	"fmt"
	"sync"
)

// Prefetch fetches tiles ahead of their use on a goroutine of its own, so
// that reading the next tiles overlaps the work on the current one. Its
// user, one goroutine, asks for tiles (Ahead) in the order it will take
// them (Get), and hands each buffer back (Release) when done with it. The
// fetches run one at a time, in that order, at most depth of them ahead
// of what was taken: so whatever fetch uses (a GDAL dataset handle) is
// used by one goroutine at a time, and the memory held is that of depth
// buffers plus those the user holds. Asking is cheap and never blocks: a
// user may ask for a whole list of tiles at once.
type Prefetch[T any] struct {
	fetch func(t Tile, buf T) (T, error)
	depth int

	mu    sync.Mutex
	order []*fetched[T] // asked for, not yet taken, in order
	todo  []*fetched[T] // asked for, not yet started, in order
	ahead int           // started, not yet taken
	free  []T
	stop  bool
	wake  chan struct{} // the fetcher may have something to do
	done  chan struct{} // the fetcher has returned
}

// fetched is one tile asked for, and once ready, its fetch's result.
type fetched[T any] struct {
	t     Tile
	buf   T
	err   error
	taken bool
	ready chan struct{}
}

// NewPrefetch starts the goroutine of a Prefetch that fetches at most
// depth tiles ahead of those taken (0: each tile only once it is waited
// for). fetch reads tile t into buf, a buffer handed back by Release or
// the zero T, and returns it, grown as needed. Close stops the goroutine.
// It panics if depth is negative.
func NewPrefetch[T any](depth int, fetch func(t Tile, buf T) (T, error)) *Prefetch[T] {
	if depth < 0 {
		panic(fmt.Sprintf("tiles: prefetch depth %d", depth))
	}
	p := &Prefetch[T]{fetch: fetch, depth: depth, wake: make(chan struct{}, 1), done: make(chan struct{})}
	go p.run()
	return p
}

// Ahead asks for tile t, to be taken by Get after the tiles asked for
// before it.
func (p *Prefetch[T]) Ahead(t Tile) {
	p.mu.Lock()
	p.ask(t)
	p.mu.Unlock()
	p.signal()
}

func (p *Prefetch[T]) ask(t Tile) *fetched[T] {
	f := &fetched[T]{t: t, ready: make(chan struct{})}
	p.order = append(p.order, f)
	p.todo = append(p.todo, f)
	return f
}

func (p *Prefetch[T]) signal() {
	select {
	case p.wake <- struct{}{}:
	default:
	}
}

// Get waits for tile t and returns its buffer and the fetch's error (with
// an error, the buffer fetch returned, which may be released too). t
// must be the first tile asked for and not yet taken; with none waiting,
// Get asks for it first. The buffer is the caller's until it hands it to
// Release. Get returns ctx.Err() if ctx ends first, or an error after
// Close. It panics if t is not the tile due.
func (p *Prefetch[T]) Get(ctx context.Context, t Tile) (T, error) {
	f := p.take(t)
	p.signal()
	var zero T
	select {
	case <-f.ready:
		return f.buf, f.err
	case <-ctx.Done():
		return zero, ctx.Err()
	case <-p.done:
		select {
		case <-f.ready:
			return f.buf, f.err
		default:
			return zero, fmt.Errorf("%v: prefetch closed", t)
		}
	}
}

// take marks tile t taken, asking for it first when no tile waits, and
// returns it; it panics if another tile is due.
func (p *Prefetch[T]) take(t Tile) *fetched[T] {
	p.mu.Lock()
	defer p.mu.Unlock()
	if len(p.order) == 0 {
		p.ask(t)
	}
	f := p.order[0]
	if f.t != t {
		panic(fmt.Sprintf("tiles: prefetch: got %v, but %v was asked for first", t, f.t))
	}
	p.order = p.order[1:]
	if !p.unstarted(f) {
		p.ahead--
	}
	f.taken = true
	return f
}

func (p *Prefetch[T]) unstarted(f *fetched[T]) bool {
	return len(p.todo) > 0 && p.todo[0] == f
}

// Release hands buf back for a later fetch to reuse.
func (p *Prefetch[T]) Release(buf T) {
	p.mu.Lock()
	defer p.mu.Unlock()
	if len(p.free) <= p.depth {
		p.free = append(p.free, buf)
	}
}

// Close stops fetching: it waits for the fetch under way, if any, and
// drops the tiles not yet fetched. Afterwards nothing the fetch function
// uses is touched by the Prefetch.
func (p *Prefetch[T]) Close() {
	p.mu.Lock()
	p.stop = true
	p.mu.Unlock()
	p.signal()
	<-p.done
}

// run fetches the tiles asked for, in order, while fewer than depth wait
// to be taken or the next one is waited for.
func (p *Prefetch[T]) run() {
	defer close(p.done)
	for {
		f, buf, ok := p.next()
		if !ok {
			return
		}
		f.buf, f.err = p.fetch(f.t, buf)
		close(f.ready)
	}
}

// next waits for the next tile to fetch and a buffer for it; false once
// stopped.
func (p *Prefetch[T]) next() (*fetched[T], T, bool) {
	for {
		p.mu.Lock()
		if p.stop {
			p.mu.Unlock()
			var zero T
			return nil, zero, false
		}
		if len(p.todo) > 0 && (p.todo[0].taken || p.ahead < p.depth) {
			f := p.todo[0]
			p.todo = p.todo[1:]
			if !f.taken {
				p.ahead++
			}
			var buf T
			if k := len(p.free); k > 0 {
				buf, p.free = p.free[k-1], p.free[:k-1]
			}
			p.mu.Unlock()
			return f, buf, true
		}
		p.mu.Unlock()
		<-p.wake
	}
}
