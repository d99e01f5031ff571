package scenario

// collar is an irregular nodata strip along the four edges of a w x h grid:
// on each edge its width wanders (1-D fBm) around a base that differs per
// edge, and is never less than one pixel.
type collar struct {
	key        uint64
	w, h       int
	base, amp  float64
	cell       float64
	edgeFactor [4]float64
}

func newCollar(key uint64, w, h int, frac float64) collar {
	l := float64(min(w, h))
	c := collar{key: key, w: w, h: h, base: frac*l + 1, amp: 0.4*frac*l + 1, cell: max(l/12, 8)}
	for e := range c.edgeFactor {
		c.edgeFactor[e] = 0.6 + 0.9*unit(hash2(key, int64(e), 7))
	}
	return c
}

// width is the collar width (px) of edge e at position t along it.
func (c *collar) width(e int, t int) float64 {
	v := c.base*c.edgeFactor[e] + c.amp*fbm1(subKey(c.key, uint64(e)), (float64(t)+0.5)/c.cell, 3)
	return max(v, 1)
}

// fill sets dst[j*w+i] for the window (x0, y0, w, h): true in the collar
// and outside the grid.
func (c *collar) fill(x0, y0, w, h int, dst []bool) {
	top := make([]float64, w)
	bottom := make([]float64, w)
	for i := range w {
		top[i] = c.width(0, x0+i)
		bottom[i] = c.width(1, x0+i)
	}
	for j := range h {
		y := y0 + j
		left, right := c.width(2, y), c.width(3, y)
		fy := float64(y)
		row := dst[j*w : (j+1)*w]
		for i := range row {
			x := x0 + i
			fx := float64(x)
			row[i] = x < 0 || y < 0 || x >= c.w || y >= c.h ||
				fx < left || fx >= float64(c.w)-right || fy < top[i] || fy >= float64(c.h)-bottom[i]
		}
	}
}
