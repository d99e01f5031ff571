package raster

import (
	"context"
	"errors"
	"fmt"
	"path/filepath"
	"reflect"
	"strings"
	"testing"

	"github.com/airbusgeo/godal"

	"bandfold/bands"
	"bandfold/tiles"
)

// edgeFiles are rasters of integer values at the edges of the integer
// kernel's range (see bands' intCases): each maps a pixel to a value of
// its type, sign a hash of the pixel giving ±1. Those whose values span
// more than 65534 go to AddPixels' exact path instead of the kernel.
var edgeFiles = []struct {
	name  string
	dtype godal.DataType
	value func(x, y, b int, sign float64) float64
}{
	{"int16 ±32767", godal.Int16, func(x, y, b int, sign float64) float64 { return sign * 32767 }},
	{"int16 -32768..32767", godal.Int16, func(x, y, b int, sign float64) float64 { return 0.5*sign*65535 - 0.5 }},
	{"uint16 1..65535 (a shift fits)", godal.UInt16, func(x, y, b int, sign float64) float64 { return 32768 + sign*32767 }},
	{"uint16 0..65534 (a shift fits)", godal.UInt16, func(x, y, b int, sign float64) float64 { return 32767 + sign*32767 }},
	{"uint16 0..65535 (no shift fits)", godal.UInt16, func(x, y, b int, sign float64) float64 { return 32767.5 + sign*32767.5 }},
	{"uint8 0..255", godal.Byte, func(x, y, b int, sign float64) float64 { return float64((x*37 + y*11 + b*101) % 256) }},
}

// writeEdgeFile writes edge file c as a 41×29 raster of 3 bands.
func writeEdgeFile(t *testing.T, dir string, ci int) string {
	c := edgeFiles[ci]
	r := defaultRaster()
	r.w, r.h, r.dtype = 41, 29, c.dtype
	r.values = func(x, y, b int) float64 {
		sign := float64(1 - 2*((x*7919+y*104729+b*31)>>3&1))
		return c.value(x, y, b, sign)
	}
	return r.write(t, filepath.Join(dir, fmt.Sprintf("edge%d.tif", ci)))
}

// scanInt16 accumulates the co-moments and the shift differences (both
// pair sets) of s as the job's noise pass does on the int16 path: tiles
// of tw×th read through an Int16Reader of the given depth, each read with
// a halo row for its vertical pairs (AddInt16Window) and paired with its
// left neighbour's edge column for its horizontal pairs (AddInt16Pairs).
func scanInt16(t *testing.T, s *Stack, tw, th, depth int) (mom, noise *bands.Accumulator) {
	t.Helper()
	ir, err := s.NewInt16Reader(depth)
	if err != nil {
		t.Fatal(err)
	}
	defer ir.Close()
	g := tiles.NewGrid(s.Width, s.Height, tw, th)
	own, ext := g.All(), g.All()
	for i := range ext {
		ext[i].H = min(ext[i].H+1, s.Height-ext[i].Y)
	}
	p := s.Len()
	mom, noise = bands.NewExactAccumulator(p), bands.NewExactAccumulator(p)
	var right bands.Int16Column
	for it, err := range ir.Tiles(context.Background(), ext) {
		if err != nil {
			t.Fatal(err)
		}
		o := own[it.Tile.Index]
		win := bands.Int16Window{X: it.X, Shift: it.Shift, Valid: it.Valid, P: p,
			W: it.Tile.W, H: it.Tile.H, OwnW: o.W, OwnH: o.H}
		bands.AddInt16Window(mom, noise, win, bands.Both)
		if o.X > 0 {
			bands.AddInt16Pairs(noise, right, win.Column(0, bands.Int16Column{}))
		}
		right = win.Column(o.W-1, right)
	}
	return mom, noise
}

// scanFloat accumulates the same on today's float64 path, the whole
// raster as one window (Read, AddWindow).
func scanFloat(t *testing.T, s *Stack) (mom, noise *bands.Accumulator) {
	t.Helper()
	x, valid, _ := readAll(t, s)
	win := bands.Window{X: x, Valid: valid, P: s.Len(), W: s.Width, H: s.Height, OwnW: s.Width, OwnH: s.Height}
	mom, noise = bands.NewExactAccumulator(s.Len()), bands.NewExactAccumulator(s.Len())
	bands.AddWindow(mom, noise, win, bands.Both)
	return mom, noise
}

// TestInt16ReaderEdges: the co-moments and noise differences read through
// an Int16Reader and summed by the integer kernel are bit for bit those of
// today's float64 path over the whole raster (known by construction:
// exact integer sums do not depend on their order or cut), for files of
// values at the kernel's edges (±32767, unsigned 16-bit data with and
// without a shift that fits, 8-bit data), with and without nodata, for
// any tile size from 1×1 to the whole raster and read-ahead depths 0 to 3.
func TestInt16ReaderEdges(t *testing.T) {
	dir := t.TempDir()
	for ci, c := range edgeFiles {
		path := writeEdgeFile(t, dir, ci)
		for _, opts := range [][]Option{nil, {NoData([]float64{edgeFiles[ci].value(0, 0, 0, 1)})}} {
			s, err := Open([]string{path}, opts...)
			if err != nil {
				t.Fatal(err)
			}
			wantM, wantN := scanFloat(t, s)
			for k, tl := range [][2]int{{1, 1}, {41, 29}, {7, 5}, {16, 3}, {3, 29}} {
				depth := k % 4
				gotM, gotN := scanInt16(t, s, tl[0], tl[1], depth)
				what := fmt.Sprintf("%s nodata %v tiles %v depth %d", c.name, opts != nil, tl, depth)
				if !gotM.Exact() || !reflect.DeepEqual(gotM.State(), wantM.State()) {
					t.Errorf("%s: co-moments differ from the float64 path's", what)
				}
				if !gotN.Exact() || !reflect.DeepEqual(gotN.State(), wantN.State()) {
					t.Errorf("%s: noise differences differ from the float64 path's", what)
				}
			}
			s.Close()
		}
	}
}

// TestInt16ReaderAhead: windows asked for ahead, asked for by Read alone,
// or read through Tiles (also broken off early) are those ReadInt16 reads
// (known by construction); a window beyond the raster fails naming the
// file, and the reader goes on reading after it.
func TestInt16ReaderAhead(t *testing.T) {
	path := writeEdgeFile(t, t.TempDir(), 0)
	s, err := Open([]string{path})
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	plain, err1 := s.NewReader()
	ir, err2 := s.NewInt16Reader(2)
	if err := errors.Join(err1, err2); err != nil {
		t.Fatal(err)
	}
	defer plain.Close()
	defer ir.Close()
	ctx := context.Background()
	all := tiles.NewGrid(s.Width, s.Height, 9, 7).All()
	for _, tl := range all[:4] {
		ir.Ahead(tl)
	}
	for _, tl := range all {
		it, err := ir.Read(ctx, tl) // the first four asked for ahead, the rest not
		if err != nil {
			t.Fatal(err)
		}
		checkSameRead(t, plain, it)
		ir.Release(it)
	}
	for it, err := range ir.Tiles(ctx, all) {
		if err != nil || it.Tile.Index == 5 {
			break // with tiles 6 and 7 asked for ahead
		}
	}
	bad := tiles.Tile{X: 40, Y: 0, W: 2, H: 2}
	for _, tl := range []tiles.Tile{bad, all[3]} {
		it, err := ir.Read(ctx, tl)
		switch {
		case tl == bad && (err == nil || !strings.Contains(err.Error(), path)):
			t.Errorf("window beyond the raster: error %v, want one naming %s", err, path)
		case tl != bad && err != nil:
			t.Errorf("after a failed read: %v", err)
		case tl != bad:
			checkSameRead(t, plain, it)
		}
	}
}

// checkSameRead checks that it holds what ReadInt16 reads of its window.
func checkSameRead(t *testing.T, r *Reader, it *Int16Tile) {
	t.Helper()
	n, p := it.Tile.Pixels(), len(it.Shift)
	x, valid := make([]int16, n*p), make([]bool, n)
	count, err := r.ReadInt16(it.Tile, x, valid)
	if err != nil {
		t.Fatal(err)
	}
	if count != it.Count || !reflect.DeepEqual(x, it.X) || !reflect.DeepEqual(valid, it.Valid) {
		t.Errorf("%v: read ahead differs from ReadInt16", it.Tile)
	}
}
