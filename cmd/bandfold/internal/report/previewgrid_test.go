package report

import (
	"testing"

	"bandfold/tiles"
)

// TestPreviewGridBoxAverage: a 4 x 2 image of one band reduced to 2 x 1
// cells: each cell is the mean of the valid pixels under it, whatever the
// tiling and however the rows of a tile are handed over (known by
// construction).
func TestPreviewGridBoxAverage(t *testing.T) {
	vals := []float64{1, 3, 10, 20, 5, 7, 30, 1000}
	valid := []bool{true, true, true, true, true, true, true, false}
	for _, tw := range []int{4, 2, 1} {
		g := &PreviewGrid{w: 4, h: 2, pw: 2, ph: 1, p: 1, n: make([]int32, 2)}
		for d := range g.sum {
			g.sum[d] = make([]float64, 2*3)
		}
		for x := 0; x < 4; x += tw {
			tl := tiles.Tile{X: x, Y: 0, W: tw, H: 2}
			var xs, vs []float64
			var ok []bool
			for r := range 2 {
				for c := range tw {
					xs = append(xs, vals[r*4+x+c])
					ok = append(ok, valid[r*4+x+c])
				}
			}
			vs = xs
			// Whole tiles at once, or a chunk of pixels at a time.
			var part PreviewPart
			g.Begin(tl, &part)
			if tw == 4 {
				g.Pixels(tl, 0, 2*tw, [2][]float64{xs, vs}, ok, &part)
			} else {
				for lo := 0; lo < 2*tw; lo += 3 {
					hi := min(2*tw, lo+3)
					g.Pixels(tl, lo, hi, [2][]float64{xs[lo:hi], vs[lo:hi]}, ok[lo:hi], &part)
				}
			}
			g.Add(&part)
		}
		// Cell 0: (1 + 3 + 5 + 7) / 4 = 4; cell 1: (10 + 20 + 30) / 3 = 20.
		for cell, want := range []float64{4, 20} {
			if got := g.sum[0][cell*3] / float64(g.n[cell]); got != want {
				t.Errorf("tiles %d wide: cell %d mean %v, want %v", tw, cell, got, want)
			}
		}
	}
}
