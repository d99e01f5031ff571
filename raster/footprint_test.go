package raster

import (
	"math"
	"testing"
)

// TestGridFootprint: the footprint of a UTM 33N grid (EPSG:32633) of 40 x
// 30 pixels of 10 m at 500 000 E (the zone's central meridian, 15° E) and
// 4 600 000 N. Its bounding box holds the central meridian on its west edge
// to a millimetre (x = 500 000 is the meridian by the projection's
// definition), and the ring is closed and counter-clockwise. The latitude
// of the top edge, about 41.55°, is GDAL/PROJ's own (checked here only for
// its sense, between 41 and 42°).
func TestGridFootprint(t *testing.T) {
	g := testGrid(t, utm33, 40, 30, [6]float64{500000, 10, 0, 4600000, 0, -10})
	f, err := GridFootprint(g)
	if err != nil {
		t.Fatal(err)
	}
	if f.EPSG != 32633 {
		t.Errorf("EPSG %d, want 32633", f.EPSG)
	}
	if math.Abs(f.BBox[0]-15) > 1e-8 || f.BBox[2] <= 15 || f.BBox[1] < 41 || f.BBox[3] > 42 || f.BBox[3] <= f.BBox[1] {
		t.Errorf("bbox %v", f.BBox)
	}
	if n := len(f.Ring); n != 4*edgePoints+1 || f.Ring[0] != f.Ring[n-1] || signedArea(f.Ring) <= 0 {
		t.Errorf("ring of %d points, closed %v, area %g", n, f.Ring[0] == f.Ring[n-1], signedArea(f.Ring))
	}
	if _, err := GridFootprint(Grid{Width: 3, Height: 2}); err == nil {
		t.Error("a grid without a CRS has a footprint")
	}
}
