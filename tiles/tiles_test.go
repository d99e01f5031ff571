package tiles_test

import (
	"context"
	"errors"
	"math/rand/v2"
	"slices"
	"sync/atomic"
	"testing"
	"time"

	"bandfold/tiles"
)

// TestGridCoversEveryPixelOnce is a seeded property test: for odd image sizes
// and tile shapes, every pixel lies in exactly one tile (known by construction
// of a coverage count).
func TestGridCoversEveryPixelOnce(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	for range 200 {
		w, h := 1+rng.IntN(97), 1+rng.IntN(89)
		tw, th := 1+rng.IntN(40), 1+rng.IntN(40)
		g := tiles.NewGrid(w, h, tw, th)
		count := make([]int, w*h)
		n := 0
		for tl := range g.Tiles() {
			if tl.Index != n {
				t.Fatalf("%dx%d/%dx%d: tile %d has index %d", w, h, tw, th, n, tl.Index)
			}
			n++
			if tl.W <= 0 || tl.H <= 0 || tl.X+tl.W > w || tl.Y+tl.H > h {
				t.Fatalf("%dx%d: %v outside the image", w, h, tl)
			}
			for y := tl.Y; y < tl.Y+tl.H; y++ {
				for x := tl.X; x < tl.X+tl.W; x++ {
					count[y*w+x]++
				}
			}
		}
		if n != g.Len() {
			t.Fatalf("iterated %d tiles, Len says %d", n, g.Len())
		}
		for i, c := range count {
			if c != 1 {
				t.Fatalf("%dx%d with %dx%d tiles: pixel %d covered %d times", w, h, tw, th, i, c)
			}
		}
	}
}

func TestShardsPartitionTheGrid(t *testing.T) {
	g := tiles.NewGrid(1000, 700, 128, 96)
	for _, n := range []int{1, 2, 3, 4, 7, 100} {
		seen := make([]int, g.Len())
		for i := range n {
			for _, tl := range g.Shard(i, n) {
				if tl.Index%n != i {
					t.Fatalf("shard %d/%d holds tile %d", i, n, tl.Index)
				}
				seen[tl.Index]++
			}
		}
		for i, c := range seen {
			if c != 1 {
				t.Fatalf("n=%d: tile %d in %d shards", n, i, c)
			}
		}
	}
}

func TestSizeFor(t *testing.T) {
	const mib = 1 << 20
	tests := []struct {
		name                  string
		width, height         int
		blockW, blockH, bands int
		wantW, wantH          int
	}{
		// The two shapes named in the design: 224 bands in 256-wide blocks
		// gives strips of 36 rows (16 MiB / (224 x 8 B) / 256 = 36.6); 7
		// bands in 512 x 512 blocks gives whole blocks.
		{"hyperspectral", 1024, 1024, 256, 256, 224, 256, 36},
		{"multispectral", 8192, 8192, 512, 512, 7, 512, 512},
		{"small blocks grow sideways", 8192, 8192, 128, 128, 7, 2304, 128}, // 18 blocks of 128 x 128 fit 16 MiB,
		{"strips grow down", 1000, 5000, 1000, 1, 6, 1000, 349},
		{"image smaller than a tile", 349, 352, 349, 11, 6, 349, 352},
	}
	for _, tc := range tests {
		w, h := tiles.SizeFor(tc.width, tc.height, tc.blockW, tc.blockH, tc.bands, 16*mib)
		if w != tc.wantW || h != tc.wantH {
			t.Errorf("%s: got %dx%d, want %dx%d", tc.name, w, h, tc.wantW, tc.wantH)
		}
		if w*h*tc.bands*8 > 16*mib && !(w == tc.blockW && h == 1) {
			t.Errorf("%s: %dx%d x %d bands exceeds the budget", tc.name, w, h, tc.bands)
		}
	}
}

type sumWorker struct {
	delay  func(tiles.Tile) time.Duration
	closed *atomic.Int32
	fail   int
}

func (w *sumWorker) Do(ctx context.Context, t tiles.Tile) (int, error) {
	if t.Index == w.fail {
		return 0, errors.New("boom")
	}
	select {
	case <-time.After(w.delay(t)):
	case <-ctx.Done():
		return 0, ctx.Err()
	}
	return t.Index, nil
}

func (w *sumWorker) Close() error { w.closed.Add(1); return nil }

func TestRunDeliversInTileOrder(t *testing.T) {
	g := tiles.NewGrid(300, 200, 17, 13)
	for _, workers := range []int{1, 2, 7} {
		var closed atomic.Int32
		var got []int
		var progress int
		err := tiles.Run(context.Background(), g.All(), tiles.Options{Workers: workers, Progress: func(done, total int) { progress = done }},
			func(int) (tiles.Worker[int], error) {
				// Uneven work so that tiles finish out of order.
				return &sumWorker{closed: &closed, fail: -1, delay: func(t tiles.Tile) time.Duration {
					return time.Duration((t.Index*7919)%5) * 100 * time.Microsecond
				}}, nil
			},
			func(tl tiles.Tile, v int) error { got = append(got, v); return nil })
		if err != nil {
			t.Fatal(err)
		}
		want := make([]int, g.Len())
		for i := range want {
			want[i] = i
		}
		if !slices.Equal(got, want) {
			t.Fatalf("workers=%d: delivered out of order: %v", workers, got[:10])
		}
		if progress != g.Len() {
			t.Errorf("progress ended at %d of %d", progress, g.Len())
		}
		if int(closed.Load()) != min(workers, g.Len()) {
			t.Errorf("workers=%d: %d workers closed", workers, closed.Load())
		}
	}
}

func TestRunStopsOnError(t *testing.T) {
	g := tiles.NewGrid(100, 100, 10, 10)
	var closed atomic.Int32
	delivered := 0
	err := tiles.Run(context.Background(), g.All(), tiles.Options{Workers: 3},
		func(int) (tiles.Worker[int], error) {
			return &sumWorker{closed: &closed, fail: 40, delay: func(tiles.Tile) time.Duration { return 0 }}, nil
		},
		func(tiles.Tile, int) error { delivered++; return nil })
	if err == nil || err.Error() != "boom" {
		t.Fatalf("got %v, want boom", err)
	}
	if delivered > 40 {
		t.Errorf("delivered %d tiles past the failing one", delivered)
	}
	if closed.Load() != 3 {
		t.Errorf("%d of 3 workers closed", closed.Load())
	}
}

// TestRunCancellation checks that cancelling the context stops the workers
// promptly and that Run reports the cancellation.
func TestRunCancellation(t *testing.T) {
	g := tiles.NewGrid(1000, 1000, 10, 10)
	ctx, cancel := context.WithCancel(context.Background())
	var closed atomic.Int32
	delivered := 0
	err := tiles.Run(ctx, g.All(), tiles.Options{Workers: 2},
		func(int) (tiles.Worker[int], error) {
			return &sumWorker{closed: &closed, fail: -1, delay: func(tiles.Tile) time.Duration { return time.Millisecond }}, nil
		},
		func(tl tiles.Tile, _ int) error {
			delivered++
			if delivered == 5 {
				cancel()
			}
			return nil
		})
	if !errors.Is(err, context.Canceled) {
		t.Fatalf("got %v, want context.Canceled", err)
	}
	if delivered >= g.Len() {
		t.Fatal("every tile was delivered despite cancellation")
	}
	if closed.Load() != 2 {
		t.Errorf("%d of 2 workers closed", closed.Load())
	}
}

func TestRunOpenError(t *testing.T) {
	g := tiles.NewGrid(10, 10, 5, 5)
	want := errors.New("cannot open")
	err := tiles.Run(context.Background(), g.All(), tiles.Options{Workers: 2},
		func(int) (tiles.Worker[int], error) { return nil, want },
		func(tiles.Tile, int) error { return nil })
	if !errors.Is(err, want) {
		t.Fatalf("got %v", err)
	}
}
