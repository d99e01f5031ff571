package raster

import (
	"errors"
	"math"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"github.com/airbusgeo/godal"

	"bandfold/tiles/testenv"
)

// TestAlignStack stacks a 30 m band with a 15 m band over the same ground.
// Without AlignStack the stack is refused with both grids named; with
// AlignStack("average") the fine band reads as GDAL's own gdalwarp -tr 30
// 30 -r average makes it, to 1e-12.
func TestAlignStack(t *testing.T) {
	testenv.NeedTool(t, "gdalwarp", "gdal-bin") // for the reference resampling
	dir := t.TempDir()
	coarse := defaultRaster()
	coarse.w, coarse.h, coarse.bands, coarse.dtype = 20, 12, 1, godal.Float64
	coarse.gt = [6]float64{500000, 30, 0, 4600000, 0, -30}
	fine := coarse
	fine.w, fine.h = 40, 24
	fine.gt[1], fine.gt[5] = 15, -15
	fine.values = func(x, y, _ int) float64 {
		return math.Sin(0.37*float64(x)) + math.Cos(0.23*float64(y)) + 0.01*float64(x*y)
	}
	pc := coarse.write(t, filepath.Join(dir, "coarse.tif"))
	pf := fine.write(t, filepath.Join(dir, "fine.tif"))

	_, err := Open([]string{pc, pf})
	if !errors.Is(err, ErrGridMismatch) {
		t.Fatalf("mixed grids: got %v, want ErrGridMismatch", err)
	}
	for _, want := range []string{"fine.tif", "40x24 pixels of 15 x 15", "coarse.tif", "20x12 pixels of 30 x 30", `"WGS 84 / UTM zone 33N"`, "--align"} {
		if !strings.Contains(err.Error(), want) {
			t.Errorf("grid error %q does not say %q", err, want)
		}
	}

	ref := filepath.Join(dir, "fine-30m.tif")
	if out, err := exec.Command("gdalwarp", "-q", "-tr", "30", "30", "-r", "average", pf, ref).CombinedOutput(); err != nil {
		t.Fatalf("gdalwarp: %v: %s", err, out)
	}
	want, err := Open([]string{ref})
	if err != nil {
		t.Fatal(err)
	}
	s, err := Open([]string{pc, pf}, AlignStack("average"))
	if err != nil {
		t.Fatal(err)
	}
	if err := s.Grid.Compare(want.Grid); err != nil {
		t.Fatalf("gdalwarp's grid differs from the stack's: %v", err)
	}
	if len(s.Aligned) != 1 || s.Aligned[0] != pf || s.Bands[1].Path != pf || s.Bands[1].Name != "fine" {
		t.Errorf("aligned %v, band 2 %+v", s.Aligned, s.Bands[1])
	}
	got, valid, n := readAll(t, s)
	ref64, _, _ := readAll(t, want)
	if n != s.Width*s.Height {
		t.Errorf("%d valid pixels, want %d", n, s.Width*s.Height)
	}
	for i := range s.Width * s.Height {
		if w := ref64[i]; !valid[i] || math.Abs(got[2*i+1]-w) > 1e-12*max(1, math.Abs(w)) {
			t.Fatalf("pixel %d = %v (valid %v), gdalwarp gives %v", i, got[2*i+1], valid[i], w)
		}
		if got[2*i] != coarse.values(i%coarse.w, i/coarse.w, 0) {
			t.Fatalf("pixel %d of the first file = %v, want %v", i, got[2*i], coarse.values(i%coarse.w, i/coarse.w, 0))
		}
	}

	// Close releases the VRT; a subset shares it and releases nothing.
	vrt := s.sources[1]
	sub, err := s.Subset([]int{1})
	if err != nil {
		t.Fatal(err)
	}
	sub.Close()
	if _, err := openDataset(vrt); err != nil {
		t.Errorf("closing a subset released its parent's VRT: %v", err)
	}
	if err := s.Close(); err != nil {
		t.Fatal(err)
	}
	if _, err := openDataset(vrt); err == nil {
		t.Errorf("%s still opens after Close", vrt)
	}
	if err := s.Close(); err != nil {
		t.Errorf("second Close: %v", err)
	}
	if _, err := Open([]string{pc, pf}, AlignStack("wobbly")); !errors.Is(err, ErrBadSpec) {
		t.Errorf("bad resampling: got %v, want ErrBadSpec", err)
	}
}

// TestAlignStackNoDataOverride: a nodata value given with NoData keeps the
// warp from blending those pixels into their neighbours. The fine band is
// 0 (declared nodata by the caller only) in its western half and 100
// elsewhere, so a 30 m average is 100 wherever it is valid; without the
// override, the pixels on the edge would average 0 and 100 (known by
// construction).
func TestAlignStackNoDataOverride(t *testing.T) {
	dir := t.TempDir()
	coarse := defaultRaster()
	coarse.w, coarse.h, coarse.bands = 10, 4, 1
	coarse.gt = [6]float64{500000, 30, 0, 4600000, 0, -30}
	coarse.values = func(x, y, _ int) float64 { return 1 }
	fine := coarse
	fine.w, fine.h = 20, 8
	fine.gt[1], fine.gt[5] = 15, -15
	fine.values = func(x, y, _ int) float64 {
		if x < 9 { // fine column 9 shares coarse column 4 with column 8
			return 0
		}
		return 100
	}
	pc := coarse.write(t, filepath.Join(dir, "coarse.tif"))
	pf := fine.write(t, filepath.Join(dir, "fine.tif"))
	s, err := Open([]string{pc, pf}, AlignStack("average"), NoData([]float64{0}))
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	got, valid, _ := readAll(t, s)
	for i := range s.Width * s.Height {
		x := i % s.Width
		switch {
		case x < 4 && valid[i]:
			t.Errorf("pixel %d (column %d) is valid: %v", i, x, got[2*i+1])
		case x >= 4 && (!valid[i] || got[2*i+1] != 100):
			t.Errorf("pixel %d (column %d) = %v (valid %v), want 100", i, x, got[2*i+1], valid[i])
		}
	}
}
