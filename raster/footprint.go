package raster

import (
	"fmt"
	"math"
	"strconv"

	"github.com/airbusgeo/godal"
)

// Footprint is where a grid lies on the Earth, as catalogues describe it:
// its outline and bounding box in longitude and latitude on WGS 84, and
// its own CRS's EPSG code (0 when the CRS has none).
type Footprint struct {
	// Ring is the outline, counter-clockwise and closed (the first point
	// repeated last), densified along the grid's edges so that a projected
	// grid's curved outline in longitude and latitude is followed.
	Ring [][2]float64
	// BBox is west, south, east, north.
	BBox [4]float64
	EPSG int
}

// edgePoints is the number of points taken along each edge of the grid.
const edgePoints = 16

// GridFootprint returns the footprint of g through a GDAL coordinate
// transformation to WGS 84. A grid without a CRS or geotransform has none
// (an error).
func GridFootprint(g Grid) (*Footprint, error) {
	if !g.HasGeoTransform || g.Projection == "" {
		return nil, fmt.Errorf("the grid has no CRS or geotransform: it has no place on the Earth")
	}
	var cols, rows []float64
	add := func(c, r float64) { cols, rows = append(cols, c), append(rows, r) }
	w, h := float64(g.Width), float64(g.Height)
	for i := range edgePoints { // counter-clockwise in the image: down the left, along the bottom, up the right, back along the top
		t := float64(i) / edgePoints
		add(0, h*t)
	}
	for i := range edgePoints {
		add(w*float64(i)/edgePoints, h)
	}
	for i := range edgePoints {
		add(w, h*(1-float64(i)/edgePoints))
	}
	for i := range edgePoints {
		add(w*(1-float64(i)/edgePoints), 0)
	}
	xs, ys := make([]float64, len(cols)), make([]float64, len(cols))
	for i := range cols {
		xs[i], ys[i] = applyGT(g.GeoTransform, cols[i], rows[i])
	}
	epsg, err := toWGS84(g.Projection, xs, ys)
	if err != nil {
		return nil, err
	}
	f := &Footprint{EPSG: epsg, BBox: [4]float64{math.Inf(1), math.Inf(1), math.Inf(-1), math.Inf(-1)}}
	for i := range xs {
		f.Ring = append(f.Ring, [2]float64{xs[i], ys[i]})
		f.BBox = [4]float64{min(f.BBox[0], xs[i]), min(f.BBox[1], ys[i]), max(f.BBox[2], xs[i]), max(f.BBox[3], ys[i])}
	}
	if signedArea(f.Ring) < 0 { // a north-up grid's image order is clockwise on the map
		for i, j := 0, len(f.Ring)-1; i < j; i, j = i+1, j-1 {
			f.Ring[i], f.Ring[j] = f.Ring[j], f.Ring[i]
		}
	}
	f.Ring = append(f.Ring, f.Ring[0])
	return f, nil
}

// toWGS84 transforms the points (xs, ys) of the CRS given as WKT to
// longitude and latitude on WGS 84 in place, and returns the CRS's EPSG
// code (0 when it has none).
func toWGS84(wkt string, xs, ys []float64) (int, error) {
	src, err := godal.NewSpatialRefFromWKT(wkt, errLogger)
	if err != nil {
		return 0, fmt.Errorf("read CRS: %w", err)
	}
	defer src.Close()
	epsg := 0
	if src.AutoIdentifyEPSG() == nil || src.AuthorityName("") == "EPSG" {
		epsg, _ = strconv.Atoi(src.AuthorityCode(""))
	}
	// WGS 84 as a PROJ string: longitude first, whatever the authority's
	// axis order.
	dst, err := godal.NewSpatialRefFromProj4("+proj=longlat +datum=WGS84 +no_defs", errLogger)
	if err != nil {
		return 0, err
	}
	defer dst.Close()
	tr, err := godal.NewTransform(src, dst, errLogger)
	if err != nil {
		return 0, fmt.Errorf("transform to WGS 84: %w", err)
	}
	defer tr.Close()
	ok := make([]bool, len(xs))
	if err := tr.TransformEx(xs, ys, make([]float64, len(xs)), ok); err != nil {
		return 0, fmt.Errorf("transform to WGS 84: %w", err)
	}
	return epsg, nil
}

// signedArea is the shoelace area of a ring, positive counter-clockwise.
func signedArea(ring [][2]float64) float64 {
	var a float64
	for i := range ring {
		j := (i + 1) % len(ring)
		a += ring[i][0]*ring[j][1] - ring[j][0]*ring[i][1]
	}
	return a / 2
}
