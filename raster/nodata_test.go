package raster

import (
	"math"
	"path/filepath"
	"testing"
)

// TestNaNNoData: a float band whose declared nodata is NaN records NaN and
// reads NaN pixels as invalid, alone, through an override, and warped onto
// another grid. Which pixels are NaN is known by construction.
func TestNaNNoData(t *testing.T) {
	dir := t.TempDir()
	nan := math.NaN()
	r := defaultRaster()
	r.w, r.h, r.bands = 6, 4, 1
	r.nodata = &nan
	r.values = func(x, y, _ int) float64 {
		if x == 2 {
			return nan
		}
		return float64(10*y + x)
	}
	path := r.write(t, filepath.Join(dir, "nan.tif"))
	plain := r
	plain.nodata = nil
	noDecl := plain.write(t, filepath.Join(dir, "plain.tif"))
	// The same ground at half the pixel size: column 2 of the coarse grid
	// covers fine columns 4 and 5.
	fine := r
	fine.w, fine.h = 12, 8
	fine.gt[1], fine.gt[5] = 5, -5
	fine.values = func(x, y, _ int) float64 { return r.values(x/2, y/2, 0) }
	finePath := fine.write(t, filepath.Join(dir, "fine.tif"))
	nd, _ := ParseNoData("NaN")

	tests := []struct {
		name  string
		paths []string
		opts  []Option
	}{
		{"declared", []string{path}, nil},
		{"override", []string{noDecl}, []Option{NoData(nd)}},
		{"warped", []string{path, finePath}, []Option{AlignStack("average")}},
	}
	for _, tc := range tests {
		s, err := Open(tc.paths, tc.opts...)
		if err != nil {
			t.Fatal(err)
		}
		for _, b := range s.Bands {
			if b.NoData == nil || !math.IsNaN(*b.NoData) {
				t.Errorf("%s: band %s nodata %v, want NaN", tc.name, b.Name, b.NoData)
			}
		}
		got, valid, n := readAll(t, s)
		p := s.Len()
		for i := range valid {
			x, y := i%r.w, i/r.w
			if valid[i] != (x != 2) {
				t.Errorf("%s: pixel (%d,%d) valid=%v", tc.name, x, y, valid[i])
			}
			for b := range p {
				if valid[i] && got[i*p+b] != float64(10*y+x) {
					t.Errorf("%s: pixel (%d,%d) band %d = %v, want %v", tc.name, x, y, b+1, got[i*p+b], 10*y+x)
				}
			}
		}
		if n != r.w*r.h-r.h {
			t.Errorf("%s: %d valid pixels, want %d", tc.name, n, r.w*r.h-r.h)
		}
		s.Close()
	}
}
