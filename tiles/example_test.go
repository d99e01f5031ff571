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
