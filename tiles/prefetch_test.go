package tiles_test

import (
	"context"
	"errors"
	"fmt"
	"sync/atomic"
	"testing"
	"time"

	"bandfold/tiles"
)

// counter fetches tiles into *[]int buffers (the tile's index, repeated
// for its pixels) and records what the bounds of Prefetch are about.
type counter struct {
	gets    atomic.Int32 // Get calls begun by the user
	made    atomic.Int32 // buffers allocated by fetch
	running atomic.Int32 // fetches under way
	bad     atomic.Value // the first broken bound, a string
	depth   int
	fail    int // the tile whose fetch fails; -1 none
}

func (c *counter) fetch(t tiles.Tile, buf *[]int) (*[]int, error) {
	if c.running.Add(1) != 1 {
		c.bad.CompareAndSwap(nil, fmt.Sprintf("two fetches at once at %v", t))
	}
	defer c.running.Add(-1)
	// Fetching tile i starts with at most depth tiles started and not
	// taken, or when i is waited for: more than i - depth tiles taken.
	if g := int(c.gets.Load()); g <= t.Index-c.depth {
		c.bad.CompareAndSwap(nil, fmt.Sprintf("%v fetched with %d tiles taken, depth %d", t, g, c.depth))
	}
	if t.Index == c.fail {
		return buf, errors.New("no such tile")
	}
	if buf == nil {
		c.made.Add(1)
		buf = new([]int)
	}
	*buf = (*buf)[:0]
	for range t.Pixels() {
		*buf = append(*buf, t.Index)
	}
	return buf, nil
}

// TestPrefetch: every tile is fetched once, in order, by one fetch at a
// time, at most depth ahead of those taken, into at most depth + 1
// buffers when each is released after use (depth + 2 when the user holds
// one back); a failed fetch fails its own tile only; tiles asked for all
// at once, one ahead, or not at all (Get asks) come out the same. Known by
// construction.
func TestPrefetch(t *testing.T) {
	g := tiles.NewGrid(50, 40, 7, 6)
	for _, c := range []struct {
		name        string
		depth, fail int
		ask         string // "all", "one", "none"
		hold        bool   // keep the previous buffer until the next Get returns
	}{
		{"depth 0", 0, -1, "all", false},
		{"depth 1", 1, -1, "all", false},
		{"depth 3", 3, -1, "all", false},
		{"depth 2 one ahead", 2, -1, "one", false},
		{"depth 2 asked by Get", 2, -1, "none", false},
		{"depth 2 holding one", 2, -1, "all", true},
		{"depth 2 failing tile 5", 2, 5, "all", false},
	} {
		cnt := &counter{depth: c.depth, fail: c.fail}
		pf := tiles.NewPrefetch(c.depth, cnt.fetch)
		all := g.All()
		if c.ask == "all" {
			for _, tl := range all {
				pf.Ahead(tl)
			}
		}
		var held *[]int
		for i, tl := range all {
			if c.ask == "one" && i == 0 {
				pf.Ahead(tl)
			}
			if c.ask == "one" && i+1 < len(all) {
				pf.Ahead(all[i+1])
			}
			cnt.gets.Add(1)
			buf, err := pf.Get(context.Background(), tl)
			if (err != nil) != (i == c.fail) {
				t.Fatalf("%s: %v: error %v", c.name, tl, err)
			}
			if err != nil {
				if buf != nil {
					pf.Release(buf)
				}
				continue
			}
			if len(*buf) != tl.Pixels() || (*buf)[0] != i {
				t.Fatalf("%s: %v: buffer of %d values of tile %d", c.name, tl, len(*buf), (*buf)[0])
			}
			if c.hold {
				buf, held = held, buf
			}
			if buf != nil {
				pf.Release(buf)
			}
		}
		pf.Close()
		if bad := cnt.bad.Load(); bad != nil {
			t.Errorf("%s: %s", c.name, bad)
		}
		limit := int32(c.depth + 1)
		if c.hold {
			limit++
		}
		if cnt.made.Load() > limit {
			t.Errorf("%s: %d buffers made, want at most %d", c.name, cnt.made.Load(), limit)
		}
	}
}

// TestPrefetchOverlaps: with depth 1, the next tile's fetch starts while
// the user still holds the current one and has not asked for the next by
// Get: the overlap Prefetch exists for, shown by the order of events, not
// by timing (the deadline only stops a broken Prefetch from hanging).
func TestPrefetchOverlaps(t *testing.T) {
	started := make(chan int, 4)
	pf := tiles.NewPrefetch(1, func(t tiles.Tile, _ int) (int, error) { started <- t.Index; return t.Index, nil })
	defer pf.Close()
	a, b := tiles.Tile{Index: 0, W: 1, H: 1}, tiles.Tile{Index: 1, W: 1, H: 1}
	pf.Ahead(a)
	pf.Ahead(b)
	if v, err := pf.Get(context.Background(), a); v != 0 || err != nil {
		t.Fatalf("tile 0: %d, %v", v, err)
	}
	for want := range 2 {
		select {
		case i := <-started:
			if i != want {
				t.Fatalf("fetch %d started, want %d", i, want)
			}
		case <-time.After(10 * time.Second):
			t.Fatalf("fetch %d not started while tile 0 is held", want)
		}
	}
}

// TestPrefetchMisuse: taking a tile out of order panics; Get returns
// ctx.Err() when ctx ends first, and an error after Close for a tile not
// fetched; Close waits for the fetch under way.
func TestPrefetchMisuse(t *testing.T) {
	a, b := tiles.Tile{Index: 0, W: 1, H: 1}, tiles.Tile{Index: 1, W: 1, H: 1}
	release, inFetch := make(chan struct{}), make(chan struct{}, 2)
	var finished atomic.Bool
	pf := tiles.NewPrefetch(1, func(t tiles.Tile, _ int) (int, error) {
		inFetch <- struct{}{}
		<-release
		finished.Store(true)
		return t.Index, nil
	})
	pf.Ahead(a)
	func() {
		defer func() {
			if recover() == nil {
				t.Error("Get of tile 1 before tile 0: no panic")
			}
		}()
		pf.Get(context.Background(), b)
	}()
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	<-inFetch
	if _, err := pf.Get(ctx, a); !errors.Is(err, context.Canceled) {
		t.Errorf("Get with a cancelled context: %v", err)
	}
	closed := make(chan struct{})
	go func() { pf.Close(); close(closed) }()
	close(release)
	<-closed
	if !finished.Load() {
		t.Error("Close returned before the fetch under way")
	}
	if _, err := pf.Get(context.Background(), b); err == nil {
		t.Error("Get after Close: no error")
	}
}

// aheadWorker reads each tile's value (twice its index) through a
// Prefetch, told of its tiles in advance, and checks what Run promises a
// Lookahead worker.
type aheadWorker struct {
	pf    *tiles.Prefetch[int]
	told  []int // tiles announced by Ahead, in order
	done  int   // Do calls
	ahead int
	bad   *atomic.Value
	most  *atomic.Int32 // the most tiles any worker held
}

func (w *aheadWorker) Ahead(t tiles.Tile) {
	if w.ahead == 0 {
		w.bad.CompareAndSwap(nil, fmt.Sprintf("Ahead(%v) with Options.Ahead 0", t))
	}
	if held := len(w.told) - w.done; held > w.ahead {
		w.bad.CompareAndSwap(nil, fmt.Sprintf("Ahead(%v) with %d tiles held, Options.Ahead %d", t, held, w.ahead))
	}
	w.told = append(w.told, t.Index)
	for h := int32(len(w.told) - w.done); ; {
		if m := w.most.Load(); h <= m || w.most.CompareAndSwap(m, h) {
			break
		}
	}
	w.pf.Ahead(t)
}

func (w *aheadWorker) Do(ctx context.Context, t tiles.Tile) (int, error) {
	if w.ahead > 0 && (w.done >= len(w.told) || w.told[w.done] != t.Index) {
		w.bad.CompareAndSwap(nil, fmt.Sprintf("Do(%v) not announced next (told %v, done %d)", t, w.told, w.done))
	}
	w.done++
	v, err := w.pf.Get(ctx, t)
	w.pf.Release(0)
	return v, err
}

func (w *aheadWorker) Close() error { w.pf.Close(); return nil }

// TestRunLookahead: with Options.Ahead, a Lookahead worker is told of
// each of its tiles before Do, in the order of its Do calls, holding at
// most Ahead + 1 and, in a run of 180 tiles, at some point more than one;
// the results come in tile order for any worker count; a
// failed fetch stops the run with its error; with Ahead 0, Ahead is never
// called. Known by construction.
func TestRunLookahead(t *testing.T) {
	g := tiles.NewGrid(120, 90, 7, 9)
	for _, workers := range []int{1, 2, 5} {
		for _, ahead := range []int{0, 1, 3} {
			for _, fail := range []int{-1, 17} {
				var bad atomic.Value
				var most atomic.Int32
				var got []int
				err := tiles.Run(context.Background(), g.All(), tiles.Options{Workers: workers, Ahead: ahead},
					func(int) (tiles.Worker[int], error) {
						pf := tiles.NewPrefetch(ahead, func(t tiles.Tile, _ int) (int, error) {
							time.Sleep(time.Duration(t.Index*7919%3) * 50 * time.Microsecond) // uneven reads
							if t.Index == fail {
								return 0, errors.New("unreadable")
							}
							return 2 * t.Index, nil
						})
						return &aheadWorker{pf: pf, ahead: ahead, bad: &bad, most: &most}, nil
					},
					func(tl tiles.Tile, v int) error {
						if v != 2*tl.Index || tl.Index != len(got) {
							return fmt.Errorf("tile %d delivered %d after %d tiles", tl.Index, v, len(got))
						}
						got = append(got, v)
						return nil
					})
				what := fmt.Sprintf("%d workers, ahead %d, failing %d", workers, ahead, fail)
				switch {
				case fail < 0 && (err != nil || len(got) != g.Len()):
					t.Errorf("%s: %v after %d of %d tiles", what, err, len(got), g.Len())
				case fail >= 0 && (err == nil || err.Error() != "unreadable" || len(got) > fail):
					t.Errorf("%s: %v after %d tiles", what, err, len(got))
				}
				if ahead > 0 && fail < 0 && most.Load() < 2 {
					t.Errorf("%s: no worker was told of a tile beyond the one at hand", what)
				}
				if b := bad.Load(); b != nil {
					t.Errorf("%s: %s", what, b)
				}
			}
		}
	}
}
