package change

import (
	"context"

	"bandfold/tiles"
)

// par runs the independent pieces of a computation on up to par goroutines
// (tiles.Each; 1 or less: one after another in the caller's). Each piece
// writes only its own results and forms them as one goroutine would, so
// what is computed does not depend on the number: FitNormalization's
// fits are the same bit for bit on any number of cores.
type par int

// serial runs every piece in the caller's goroutine.
const serial par = 1

// each runs do(i) for i = 0 .. n−1 and returns the first error by i.
func (w par) each(n int, do func(i int) error) error {
	if w <= 1 || n <= 1 {
		for i := range n {
			if err := do(i); err != nil {
				return err
			}
		}
		return nil
	}
	return tiles.Each(context.Background(), n, int(w), do)
}

// minPiece is the fewest items of a range that chunks gives a piece of
// its own: below it a goroutine costs more than it saves.
const minPiece = 4096

// pieces returns the number of ranges chunks cuts n items into: two a
// goroutine, of at least minPiece items each.
func (w par) pieces(n int) int { return max(1, min(2*int(w), n/minPiece)) }

// chunks calls do(i, lo, hi) for the consecutive ranges [lo, hi) that
// cover [0, n), i = 0 .. w.pieces(n)−1.
func (w par) chunks(n int, do func(i, lo, hi int)) {
	pieces := w.pieces(n)
	size := (n + pieces - 1) / pieces
	w.each(pieces, func(i int) error {
		lo := min(i*size, n)
		do(i, lo, min(lo+size, n))
		return nil
	})
}
