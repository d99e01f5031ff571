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
// [X0, X0+CW) x [Y0, Y0+CH), their sums of both dates' preview bands and
// their pixel counts (exported for a staged run's map pieces).
type PreviewPart struct {
	X0, Y0, CW, CH int
	Sum            [2][]float64
	N              []int32
	col            []int // the cell column of each tile column, less X0
}

func (g *PreviewGrid) cellX(x int) int { return x * g.pw / g.w }
func (g *PreviewGrid) cellY(y int) int { return y * g.ph / g.h }

// Begin starts tile t's contribution in dst, reusing its buffers.
func (g *PreviewGrid) Begin(t tiles.Tile, dst *PreviewPart) {
	dst.X0, dst.Y0 = g.cellX(t.X), g.cellY(t.Y)
	dst.CW, dst.CH = g.cellX(t.X+t.W-1)-dst.X0+1, g.cellY(t.Y+t.H-1)-dst.Y0+1
	cells := dst.CW * dst.CH
	dst.N = jobkit.Grow(dst.N, cells)
	clear(dst.N)
	for d := range dst.Sum {
		dst.Sum[d] = jobkit.Grow(dst.Sum[d], cells*3)
		clear(dst.Sum[d])
	}
	dst.col = jobkit.Grow(dst.col, t.W)
	for c := range dst.col {
		dst.col[c] = g.cellX(t.X+c) - dst.X0
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
		row := (g.cellY(t.Y+r) - dst.Y0) * dst.CW
		for ; at < end; at, c = at+1, c+1 {
			i := at - lo
			if !valid[i] {
				continue
			}
			cell := row + dst.col[c]
			dst.N[cell]++
			for d := range x {
				px := x[d][i*p : i*p+p]
				s := dst.Sum[d][cell*3 : cell*3+3]
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
	for r := range pp.CH {
		for c := range pp.CW {
			from, to := r*pp.CW+c, (pp.Y0+r)*g.pw+pp.X0+c
			g.n[to] += pp.N[from]
			for d := range g.sum {
				for k := range 3 {
					g.sum[d][to*3+k] += pp.Sum[d][from*3+k]
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
