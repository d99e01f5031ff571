package tiles_test

import (
	"context"
	"fmt"

	"bandfold/tiles"
)

func ExampleGrid_Tiles() {
	g := tiles.NewGrid(5, 3, 2, 2)
	for t := range g.Tiles() {
		fmt.Println(t)
	}
	// Output:
	// tile 0 (x 0, y 0, 2x2)
	// tile 1 (x 2, y 0, 2x2)
	// tile 2 (x 4, y 0, 1x2)
	// tile 3 (x 0, y 2, 2x1)
	// tile 4 (x 2, y 2, 2x1)
	// tile 5 (x 4, y 2, 1x1)
}

// pixelCounter is a Worker that returns the number of pixels of each tile.
type pixelCounter struct{}

func (pixelCounter) Do(_ context.Context, t tiles.Tile) (int, error) { return t.Pixels(), nil }
func (pixelCounter) Close() error                                    { return nil }

func ExampleRun() {
	g := tiles.NewGrid(1000, 700, 256, 256)
	total := 0
	err := tiles.Run(context.Background(), g.All(), tiles.Options{Workers: 3},
		func(worker int) (tiles.Worker[int], error) { return pixelCounter{}, nil },
		func(t tiles.Tile, pixels int) error {
			total += pixels // called in tile order, from one goroutine
			return nil
		})
	fmt.Println(total, err)
	// Output:
	// 700000 <nil>
}

func ExamplePrefetch() {
	// fetch stands for a read into a buffer it reuses; it runs on the
	// Prefetch's own goroutine, one tile at a time.
	fetch := func(t tiles.Tile, buf []int) ([]int, error) {
		buf = buf[:0]
		for i := range t.Pixels() {
			buf = append(buf, t.Index*100+i)
		}
		return buf, nil
	}
	pf := tiles.NewPrefetch(2, fetch)
	defer pf.Close()
	g := tiles.NewGrid(4, 2, 2, 2)
	for t := range g.Tiles() {
		pf.Ahead(t) // cheap: the reads start at most 2 ahead of Get
	}
	for t := range g.Tiles() {
		buf, err := pf.Get(context.Background(), t)
		fmt.Println(t.Index, buf, err) // the next tile is read meanwhile
		pf.Release(buf)
	}
	// Output:
	// 0 [0 1 2 3] <nil>
	// 1 [100 101 102 103] <nil>
}
