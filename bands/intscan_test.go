package bands

import (
	"fmt"
	"math/rand/v2"
	"testing"
)

// image is a w×h raster of integer pixels for the scan tests: d holds them
// band-sequentially (pixel k = r·w + c), px pixel-major as float64.
type image struct {
	d     intData
	px    []float64
	valid []bool
	w, h  int
}

// rect is a window of an image: origin x, y and size w×h.
type rect struct{ x, y, w, h int }

// scanPath is one way of accumulating a tile of a scan: the float64 path
// of today's jobs or the int16 one. add adds the pixels the tile owns
// (own.w×own.h at the window's origin) and the shift differences of its
// pairs within win, and returns its first and last own columns; pair adds
// the horizontal pairs between the last column of a tile and the first of
// its right neighbour.
type scanPath[C any] interface {
	add(mom, noise *Accumulator, im image, win rect, ownW, ownH int, s Shift) (first, last C)
	pair(noise *Accumulator, left, right C)
}

// scanImage accumulates im as the noise pass of learn --method mnf does
// (cmd/bandfold/internal/job/noise.go): tiles of tw×th in row-major order,
// each tile's statistics in fresh exact accumulators merged in tile order;
// with join, a tile pairs its right edge with its right neighbour's left
// edge in the merge (path.pair), otherwise (as in a shard of a job array,
// whose tiles are not adjacent) it reads a halo column. Vertical pairs
// always read a halo row.
func scanImage[C any](im image, tw, th int, s Shift, join bool, path scanPath[C]) (mom, noise *Accumulator) {
	p := im.d.p
	mom, noise = NewExactAccumulator(p), NewExactAccumulator(p)
	hc, hr := s.Halo()
	var right C
	for y := 0; y < im.h; y += th {
		for x := 0; x < im.w; x += tw {
			ow, oh := min(tw, im.w-x), min(th, im.h-y)
			joinLeft := join && s&Horizontal != 0 && x > 0
			joinRight := join && s&Horizontal != 0 && x+ow < im.w
			c := hc
			if joinRight {
				c = 0
			}
			win := rect{x, y, min(ow+c, im.w-x), min(oh+hr, im.h-y)}
			m, n := NewExactAccumulator(p), NewExactAccumulator(p)
			first, last := path.add(m, n, im, win, ow, oh, s)
			mom.Merge(m)
			noise.Merge(n)
			if joinLeft {
				path.pair(noise, right, first)
			}
			right = last
		}
	}
	return mom, noise
}

// floatPath is the job's float64 path: AddWindow, and the edge pairs as
// AddShiftDifferences of the two columns side by side (the job's
// pairEdges).
type floatPath struct{}

// floatColumn is a column of a float64 window, pixel-major.
type floatColumn struct {
	x     []float64
	valid []bool
}

func (floatPath) add(mom, noise *Accumulator, im image, win rect, ownW, ownH int, s Shift) (first, last floatColumn) {
	p := im.d.p
	fw := Window{P: p, W: win.w, H: win.h, OwnW: ownW, OwnH: ownH}
	for r := range win.h {
		k := (win.y+r)*im.w + win.x
		fw.X = append(fw.X, im.px[k*p:(k+win.w)*p]...)
		fw.Valid = append(fw.Valid, im.valid[k:k+win.w]...)
	}
	AddWindow(mom, noise, fw, s)
	col := func(c int) floatColumn {
		var fc floatColumn
		for r := range ownH {
			i := r*win.w + c
			fc.x = append(fc.x, fw.X[i*p:(i+1)*p]...)
			fc.valid = append(fc.valid, fw.Valid[i])
		}
		return fc
	}
	return col(0), col(ownW - 1)
}

func (floatPath) pair(noise *Accumulator, left, right floatColumn) {
	h := len(left.valid)
	p := len(left.x) / h
	win := Window{P: p, W: 2, H: h, OwnW: 1, OwnH: h}
	for r := range h {
		win.X = append(append(win.X, left.x[r*p:(r+1)*p]...), right.x[r*p:(r+1)*p]...)
		win.Valid = append(win.Valid, left.valid[r], right.valid[r])
	}
	noise.AddShiftDifferences(win, Horizontal)
}

// intPath is the int16 path: AddInt16Window, Int16Window.Column and
// AddInt16Pairs.
type intPath struct{}

func (intPath) add(mom, noise *Accumulator, im image, win rect, ownW, ownH int, s Shift) (first, last Int16Column) {
	p, n := im.d.p, win.w*win.h
	iw := Int16Window{X: make([]int16, 0, n*p), Shift: im.d.shift, P: p, W: win.w, H: win.h, OwnW: ownW, OwnH: ownH}
	for b := range p {
		for r := range win.h {
			k := b*im.d.n + (win.y+r)*im.w + win.x
			iw.X = append(iw.X, im.d.x[k:k+win.w]...)
		}
	}
	for r := range win.h {
		k := (win.y+r)*im.w + win.x
		iw.Valid = append(iw.Valid, im.valid[k:k+win.w]...)
	}
	AddInt16Window(mom, noise, iw, s)
	return iw.Column(0, Int16Column{}), iw.Column(ownW-1, Int16Column{})
}

func (intPath) pair(noise *Accumulator, left, right Int16Column) { AddInt16Pairs(noise, left, right) }

// TestInt16Scan: the noise pass over a whole image on the int16 path
// (AddInt16Window on each tile, AddInt16Pairs across joined tile edges)
// gives the exact sums, and so the statistics bit for bit, of the float64
// path of today's jobs (AddWindow, AddShiftDifferences across edges) over
// the image as one tile, for every tiling from 1×1 pixels to the whole
// image, joined tiles or halos, each pair set, and every case of intCases
// (values at ±32767, unsigned 16-bit data with and without a shift that
// fits, 8-bit data, differences that do not fit the kernel): known by
// construction, integer sums not depending on their order or cut.
func TestInt16Scan(t *testing.T) {
	const w, h = 23, 19
	for _, p := range []int{1, 3, 12} {
		for ci, c := range intCases {
			rnd := rand.New(rand.NewPCG(uint64(p), uint64(100+ci)))
			d := c.gen(rnd, w*h, p)
			im := image{d: d, px: d.pixels(), valid: randomMask(rnd, w*h, 0.85), w: w, h: h}
			for _, s := range []Shift{Horizontal, Vertical, Both} {
				wantM, wantN := scanImage(im, w, h, s, true, floatPath{})
				for _, tl := range [][2]int{{1, 1}, {1, 5}, {4, 3}, {7, 11}, {w, 2}, {w, h}} {
					for _, join := range []bool{true, false} {
						what := fmt.Sprintf("p=%d %s %v tiles %v join %v", p, c.name, s, tl, join)
						gotM, gotN := scanImage(im, tl[0], tl[1], s, join, intPath{})
						checkSame(t, what+" pixels", gotM, wantM)
						checkSame(t, what+" differences", gotN, wantN)
					}
				}
			}
		}
	}
}

// TestAddInt16Pairs: the pairs across an edge on each kernel path, with
// columns of edge values whose differences fit the kernel (±32767 next to
// the same value, 8-bit data) and do not (±32767 next to ∓32767, unsigned
// 16-bit data of full range), against AddShiftDifferences of the two
// columns as a float64 window (floatPath.pair), bit for bit; and columns
// with no valid pair add nothing.
func TestAddInt16Pairs(t *testing.T) {
	const h = 2049 // more than a chunk of the kernel for few bands
	cases := []struct {
		name        string
		left, right func(r, b int) int16
	}{
		{"±32767 equal", func(r, b int) int16 { return int16(32767 * (1 - 2*(r%2))) }, func(r, b int) int16 { return int16(32767 * (1 - 2*(r%2))) }},
		{"±32767 opposite", func(r, b int) int16 { return 32767 }, func(r, b int) int16 { return -32767 }},
		{"uint16 full (stored −32768..32767)", func(r, b int) int16 { return -32768 }, func(r, b int) int16 { return int16(32767 - r%3) }},
		{"uint8", func(r, b int) int16 { return int16((r*7 + b) % 256) }, func(r, b int) int16 { return int16((r*13 + 5*b) % 256) }},
	}
	for _, p := range []int{1, 5, 12} {
		for ci, c := range cases {
			rnd := rand.New(rand.NewPCG(uint64(p), uint64(ci)))
			for _, frac := range []float64{1, 0.7, 0} {
				l, r := Int16Column{P: p, H: h}, Int16Column{P: p, H: h}
				for b := range p {
					for row := range h {
						l.X, r.X = append(l.X, c.left(row, b)), append(r.X, c.right(row, b))
					}
				}
				l.Valid, r.Valid = randomMask(rnd, h, frac), randomMask(rnd, h, frac)
				fl, fr := columnPixels(l), columnPixels(r)
				want := NewExactAccumulator(p)
				floatPath{}.pair(want, fl, fr)
				eachISA(func(isa ISA) {
					got := NewExactAccumulator(p)
					AddInt16Pairs(got, l, r)
					checkSame(t, fmt.Sprintf("%v p=%d %s valid %.1f", isa, p, c.name, frac), got, want)
				})
			}
		}
	}
}

// columnPixels returns c as a float64 column, pixel-major.
func columnPixels(c Int16Column) floatColumn {
	fc := floatColumn{x: make([]float64, 0, c.P*c.H), valid: c.Valid}
	for r := range c.H {
		for b := range c.P {
			fc.x = append(fc.x, float64(c.X[b*c.H+r]))
		}
	}
	return fc
}

// TestInt16Column: a column holds the window's own rows of column c,
// band-sequentially, in dst's storage when it has room (known by
// construction); a column out of range panics.
func TestInt16Column(t *testing.T) {
	w := Int16Window{P: 2, W: 3, H: 3, OwnW: 2, OwnH: 2, Valid: []bool{true, false, true, false, true, true, true, true, true}}
	for i := range 18 {
		w.X = append(w.X, int16(i))
	}
	dst := Int16Column{X: make([]int16, 0, 8)}
	got := w.Column(1, dst)
	want := Int16Column{X: []int16{1, 4, 10, 13}, Valid: []bool{false, true}, P: 2, H: 2}
	if fmt.Sprint(got) != fmt.Sprint(want) || &got.X[0] != &dst.X[:1][0] {
		t.Errorf("column 1 = %v (storage reused: %v), want %v", got, &got.X[0] == &dst.X[:1][0], want)
	}
	defer func() {
		if recover() == nil {
			t.Error("column 2 of a window owning 2: no panic")
		}
	}()
	w.Column(2, Int16Column{})
}
