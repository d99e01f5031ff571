package raster

import (
	"os"
	"path/filepath"
	"reflect"
	"testing"

	"github.com/airbusgeo/godal"

	"bandfold/bands"
	"bandfold/tiles"
)

// checkReadInt16 reads windows of s with ReadInt16 and with Read and
// checks that they give the same values (stored int16 plus shift against
// the float64 read, which TestReadWidensStoredTypes checks against GDAL's
// own conversion; and Int16Tile.Float64's, whole and in part), the same
// validity and count, and the same exact
// co-moments through bands (AddInt16Tile against AddPixels, bit for bit).
func checkReadInt16(t *testing.T, s *Stack, windows ...tiles.Tile) {
	t.Helper()
	shift, ok := s.Int16Shifts()
	if !ok {
		t.Fatalf("%s: bands %v do not fit int16", s.Label, s.Bands)
	}
	r, err := s.NewReader()
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	p := s.Len()
	for _, tl := range windows {
		n := tl.Pixels()
		want, wantValid := make([]float64, n*p), make([]bool, n)
		wantCount, err := r.Read(tl, want, wantValid)
		if err != nil {
			t.Fatal(err)
		}
		got, valid := make([]int16, n*p), make([]bool, n)
		count, err := r.ReadInt16(tl, got, valid)
		if err != nil {
			t.Fatal(err)
		}
		if count != wantCount || !reflect.DeepEqual(valid, wantValid) {
			t.Fatalf("%s %v: %d valid pixels, Read %d (or flags differ)", s.Label, tl, count, wantCount)
		}
		for b := range p {
			for i := range n {
				if v := float64(int32(got[b*n+i]) + shift[b]); valid[i] && v != want[i*p+b] {
					t.Fatalf("%s %v band %d pixel %d: %v, Read %v", s.Label, tl, b, i, v, want[i*p+b])
				}
			}
		}
		// Float64 gives Read's values, whole or a part.
		it := &Int16Tile{Tile: tl, X: got, Valid: valid, Count: count, Shift: shift}
		for _, part := range [][2]int{{0, n}, {n / 3, n/3 + (n+1)/2}} {
			lo, hi := part[0], part[1]
			f := it.Float64(make([]float64, (hi-lo)*p+3), lo, hi)
			for i, v := range f {
				if j := lo*p + i; valid[j/p] && v != want[j] {
					t.Fatalf("%s %v: Float64(%d, %d) value %d is %v, Read %v", s.Label, tl, lo, hi, i, v, want[j])
				}
			}
			if len(f) != (hi-lo)*p {
				t.Fatalf("%s %v: Float64(%d, %d) gave %d values", s.Label, tl, lo, hi, len(f))
			}
		}
		ia, fa := bands.NewExactAccumulator(p), bands.NewExactAccumulator(p)
		ia.AddInt16Tile(got, valid, shift)
		fa.AddPixels(want, wantValid)
		if !ia.Exact() || !reflect.DeepEqual(ia.State(), fa.State()) {
			t.Fatalf("%s %v: co-moments of the int16 read differ from the float64 read's", s.Label, tl)
		}
	}
}

// TestReadInt16Landsat: on the real Landsat 7 subset (six Byte bands),
// whole and in an off-origin window, plain and with a nodata of 0 and a
// band selection that cuts the file into two runs.
func TestReadInt16Landsat(t *testing.T) {
	if _, err := os.Stat(landsatSubset); err != nil {
		t.Skip("testdata/external/L7_ETMs.tif missing: run bash scripts/testdata.sh")
	}
	for _, opts := range [][]Option{nil, {NoData([]float64{0}), SelectBands([]int{6, 1, 2, 3})}} {
		s, err := Open([]string{landsatSubset}, opts...)
		if err != nil {
			t.Fatal(err)
		}
		checkReadInt16(t, s, tiles.Tile{W: s.Width, H: s.Height}, tiles.Tile{X: 101, Y: 37, W: 64, H: 91})
		s.Close()
	}
}

// TestReadInt16Types: synthetic Int16, UInt16 and signed-byte files with
// each type's extremes, stacked with a Byte file (runs of mixed types),
// with nodata and a mask, read as Read reads them.
func TestReadInt16Types(t *testing.T) {
	dir := t.TempDir()
	mask := defaultRaster()
	mask.bands, mask.dtype = 1, godal.Byte
	mask.values = func(x, y, b int) float64 { return float64((x + y) % 4) }
	maskPath := mask.write(t, filepath.Join(dir, "mask.tif"))
	byteFile := defaultRaster()
	byteFile.bands, byteFile.dtype = 2, godal.Byte
	byteFile.values = func(x, y, b int) float64 { return float64((x*31 + y*7 + b) % 256) }
	bytePath := byteFile.write(t, filepath.Join(dir, "byte.tif"))
	for _, c := range []struct {
		dtype  godal.DataType
		lo, hi float64
	}{{godal.Int16, -32768, 32767}, {godal.UInt16, 0, 65535}} {
		a := defaultRaster()
		a.dtype = c.dtype
		nd := c.lo + 1
		a.nodata = &nd
		a.values = func(x, y, b int) float64 {
			switch (x + 3*y + b) % 7 {
			case 0:
				return c.lo
			case 1:
				return c.hi
			case 2:
				return nd
			}
			return c.lo + float64((x*7+y*13+b)%1000)*(c.hi-c.lo)/1000
		}
		path := a.write(t, filepath.Join(dir, c.dtype.String()+".tif"))
		for _, opts := range [][]Option{nil, {SelectBands([]int{4, 1, 5, 2, 3}), Mask(maskPath)}} {
			s, err := Open([]string{path, bytePath}, opts...)
			if err != nil {
				t.Fatal(err)
			}
			checkReadInt16(t, s, tiles.Tile{W: s.Width, H: s.Height}, tiles.Tile{X: 3, Y: 2, W: 30, H: 19})
			s.Close()
		}
	}

	// Signed bytes, through the package's own writer (GDAL 3.6's Byte with
	// PIXELTYPE=SIGNEDBYTE).
	sb := filepath.Join(dir, "signed.tif")
	src, err := Open([]string{bytePath})
	if err != nil {
		t.Fatal(err)
	}
	o, err := Create(sb, Spec{Grid: src.Grid, Bands: 2, DataType: SignedByte, Scales: []float64{1, 1}, Offsets: []float64{0, 0}})
	if err != nil {
		t.Fatal(err)
	}
	tl := tiles.Tile{W: src.Width, H: src.Height}
	buf := make([]float64, tl.Pixels()*2)
	for i := range buf {
		buf[i] = float64(i%256 - 128)
	}
	if err := o.Write(tl, buf); err != nil {
		t.Fatal(err)
	}
	if err := o.Commit(); err != nil {
		t.Fatal(err)
	}
	s, err := Open([]string{sb})
	if err != nil {
		t.Fatal(err)
	}
	checkReadInt16(t, s, tl)
	s.Close()
}

// TestInt16Shifts: which stacks fit int16, and their shifts (known by
// construction from the types).
func TestInt16Shifts(t *testing.T) {
	dir := t.TempDir()
	for _, c := range []struct {
		dtype godal.DataType
		ok    bool
		shift int32
	}{
		{godal.Byte, true, 0}, {godal.Int16, true, 0}, {godal.UInt16, true, 32768},
		{godal.Int32, false, 0}, {godal.UInt32, false, 0}, {godal.Float32, false, 0},
	} {
		a := defaultRaster()
		a.dtype = c.dtype
		s, err := Open([]string{a.write(t, filepath.Join(dir, c.dtype.String()+".tif"))})
		if err != nil {
			t.Fatal(err)
		}
		shift, ok := s.Int16Shifts()
		if ok != c.ok || (ok && shift[0] != c.shift) {
			t.Errorf("%v: fits %v shift %v, want %v %d", c.dtype, ok, shift, c.ok, c.shift)
		}
		s.Bands[0].Scale = 2
		if _, ok := s.Int16Shifts(); ok {
			t.Errorf("%v scaled: fits int16", c.dtype)
		}
	}
}

// TestFlipSign: every value becomes v − 32768 (its top bit flipped), for
// slices of any length starting at any alignment; known by construction.
func TestFlipSign(t *testing.T) {
	buf := make([]int16, 40)
	for start := range 4 {
		for n := range 20 {
			for i := range buf {
				buf[i] = int16(i*2731 - 30000)
			}
			flipSign(buf[start : start+n])
			for i, v := range buf {
				want := int16(i*2731 - 30000)
				if i >= start && i < start+n {
					want ^= -32768
				}
				if v != want {
					t.Fatalf("start %d length %d: value %d is %d, want %d", start, n, i, v, want)
				}
			}
		}
	}
}

// TestReadInt16NoData: nodata values at a type's limits, and values no
// pixel of the type can hold (negative, fractional, beyond the range),
// mark the pixels Read marks.
func TestReadInt16NoData(t *testing.T) {
	dir := t.TempDir()
	for _, c := range []struct {
		dtype  godal.DataType
		lo, hi float64
		nodata []float64
	}{
		{godal.UInt16, 0, 65535, []float64{0, 65535, 32768, -1, 0.5, 70000}},
		{godal.Int16, -32768, 32767, []float64{-32768, 32767, 0, 40000, -1.5}},
		{godal.Byte, 0, 255, []float64{0, 255, 256, -1}},
	} {
		a := defaultRaster()
		a.dtype = c.dtype
		a.values = func(x, y, b int) float64 { return []float64{c.lo, c.hi, (c.lo + c.hi + 1) / 2, c.lo + 1}[(x+2*y+b)%4] }
		path := a.write(t, filepath.Join(dir, c.dtype.String()+".tif"))
		for _, nd := range c.nodata {
			s, err := Open([]string{path}, NoData([]float64{nd}))
			if err != nil {
				t.Fatal(err)
			}
			checkReadInt16(t, s, tiles.Tile{W: s.Width, H: s.Height})
			s.Close()
		}
	}
}
