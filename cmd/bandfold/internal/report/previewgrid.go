package report

import (
	"image"

	"bandfold/cmd/bandfold/internal/figures"
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/tiles"
)

// PreviewGrid gathers the previews of both dates of a change run during
// its map pass, which reads every pixel anyway: each pixel valid on both
// dates adds its three preview bands to the preview cell that holds it, so
// each preview pixel is the mean of the full-resolution pixels under it (a
// box average) at no extra read of the images.
type PreviewGrid struct {
	w, h, pw, ph, p int
	rgb             [3]int
	sum             [2][]float64 // per date: pw*ph*3 sums
	n               []int32      // pixels per cell
}

// NewPreviewGrid returns the grid of a w x h image of p bands reduced to
// the preview size, or nil when the preview enlarges the image (a small
// image is cheap to read again, and enlarging takes nearest neighbours).
func NewPreviewGrid(w, h, p int, rgb [3]int) *PreviewGrid {
	pw, ph := PreviewSize(w, h)
	if pw >= w || ph >= h {
		return nil
	}
	g := &PreviewGrid{w: w, h: h, pw: pw, ph: ph, p: p, rgb: rgb, n: make([]int32, pw*ph)}
	for d := range g.sum {
		g.sum[d] = make([]float64, pw*ph*3)
	}
	return g
}

// PreviewPart is one tile's contribution to the grid: the cells
// [x0, x0+cw) x [y0, y0+ch).
type PreviewPart struct {
	x0, y0, cw, ch int
	sum            [2][]float64
	n              []int32
	col            []int // the cell column of each tile column, less x0
}

func (g *PreviewGrid) cellX(x int) int { return x * g.pw / g.w }
func (g *PreviewGrid) cellY(y int) int { return y * g.ph / g.h }

// Begin starts tile t's contribution in dst, reusing its buffers.
func (g *PreviewGrid) Begin(t tiles.Tile, dst *PreviewPart) {
	dst.x0, dst.y0 = g.cellX(t.X), g.cellY(t.Y)
	dst.cw, dst.ch = g.cellX(t.X+t.W-1)-dst.x0+1, g.cellY(t.Y+t.H-1)-dst.y0+1
	cells := dst.cw * dst.ch
	dst.n = jobkit.Grow(dst.n, cells)
	clear(dst.n)
	for d := range dst.sum {
		dst.sum[d] = jobkit.Grow(dst.sum[d], cells*3)
		clear(dst.sum[d])
	}
	dst.col = jobkit.Grow(dst.col, t.W)
	for c := range dst.col {
		dst.col[c] = g.cellX(t.X+c) - dst.x0
	}
}

// Pixels adds pixels lo to hi (offsets in tile t) to dst: x holds both
// dates' values of those pixels and valid their flags. It walks the run
// row by row, so that the cell of a pixel costs no division.
func (g *PreviewGrid) Pixels(t tiles.Tile, lo, hi int, x [2][]float64, valid []bool, dst *PreviewPart) {
	p, c0, c1, c2 := g.p, g.rgb[0], g.rgb[1], g.rgb[2]
	for at := lo; at < hi; {
		r, c := at/t.W, at%t.W
		end := min(hi, at+t.W-c) // the end of this row within the run
		row := (g.cellY(t.Y+r) - dst.y0) * dst.cw
		for ; at < end; at, c = at+1, c+1 {
			i := at - lo
			if !valid[i] {
				continue
			}
			cell := row + dst.col[c]
			dst.n[cell]++
			for d := range x {
				px := x[d][i*p : i*p+p]
				s := dst.sum[d][cell*3 : cell*3+3]
				s[0] += px[c0]
				s[1] += px[c1]
				s[2] += px[c2]
			}
		}
	}
}

// Add adds a tile's part to the grid; parts are added in tile order, so
// the sums do not depend on the worker count.
func (g *PreviewGrid) Add(pp *PreviewPart) {
	for r := range pp.ch {
		for c := range pp.cw {
			from, to := r*pp.cw+c, (pp.y0+r)*g.pw+pp.x0+c
			g.n[to] += pp.n[from]
			for d := range g.sum {
				for k := range 3 {
					g.sum[d][to*3+k] += pp.sum[d][from*3+k]
				}
			}
		}
	}
}

// Image returns the preview of one date (0 BEFORE, 1 AFTER), each band
// stretched from its 2nd to its 98th percentile.
func (g *PreviewGrid) Image(date int) *image.RGBA {
	n := g.pw * g.ph
	valid := make([]bool, n)
	for i, c := range g.n {
		valid[i] = c > 0
	}
	var ch [3][]uint8
	band := make([]float64, n)
	for k := range 3 {
		for i := range band {
			if valid[i] {
				band[i] = g.sum[date][i*3+k] / float64(g.n[i])
			}
		}
		lim := stretchLimits(band, valid)
		ch[k] = figures.Stretch(band, valid, lim[0], lim[1])
	}
	return figures.RGB(g.pw, g.ph, ch[0], ch[1], ch[2], valid)
}
