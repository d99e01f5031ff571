package raster

/*
#include <ogr_api.h>
*/
import "C"

import (
	"errors"
	"fmt"
	"math"

	"github.com/airbusgeo/godal"
)

// ErrNoCRS is returned when ground areas are asked of a grid or polygon
// without a CRS.
var ErrNoCRS = errors.New("no CRS: areas in pixels only")

const (
	// maxSegment is the longest ground distance (m) between consecutive
	// points taken to an equal-area plane. A straight chord there stands
	// for the image of a straight edge of the source CRS; at 25 km the
	// difference is below 1e-5 of the area.
	maxSegment = 25e3
	// maxSpan bounds the arc (radians) covered by one equal-area plane, far
	// from the antipode where Lambert's projection is singular.
	maxSpan = 30 * math.Pi / 180
	// earthRadius is the mean radius (m), used only to size samplings.
	earthRadius = 6371008.8
	// cellBlock is the default number of columns sharing one area value.
	cellBlock = 64
	// maxCellValues bounds the size of a CellAreas table (32 MiB).
	maxCellValues = 1 << 22
	// frameStep is the lattice (degrees) on which the centres of the planes
	// measuring many polygons are snapped, so that nearby polygons share one.
	frameStep = 1.0
)

// equalArea takes coordinates of one CRS to Lambert azimuthal equal-area
// (LAEA) planes on the CRS's own ellipsoid. Lambert's projection is
// equal-area wherever its centre is, so planar areas there are ground areas;
// the centre only keeps shapes, and so straight chords, faithful.
type equalArea struct {
	src, geo *godal.SpatialRef
	toGeo    *godal.Transform
	a, b     float64
	frames   map[[2]float64]*laeaFrame
}

type laeaFrame struct {
	sr *godal.SpatialRef
	tr *godal.Transform
}

func newEqualArea(crsWKT string) (*equalArea, error) {
	if crsWKT == "" {
		return nil, ErrNoCRS
	}
	src, err := godal.NewSpatialRefFromWKT(crsWKT, errLogger)
	if err != nil {
		return nil, fmt.Errorf("read CRS %s: %w", crsName(crsWKT), err)
	}
	e := &equalArea{src: src, frames: map[[2]float64]*laeaFrame{}}
	a, errA := src.SemiMajor()
	b, errB := src.SemiMinor()
	if errA != nil || errB != nil || !(a > 0 && b > 0) {
		e.Close()
		return nil, fmt.Errorf("CRS %s: no ellipsoid", crsName(crsWKT))
	}
	e.a, e.b = a, b
	// Longitude and latitude on the same ellipsoid, only to place centres.
	if e.geo, err = godal.NewSpatialRefFromProj4(fmt.Sprintf("+proj=longlat +a=%.17g +b=%.17g +no_defs", a, b), errLogger); err != nil {
		e.Close()
		return nil, fmt.Errorf("CRS %s: geographic CRS: %w", crsName(crsWKT), err)
	}
	if e.toGeo, err = godal.NewTransform(src, e.geo, errLogger); err != nil {
		e.Close()
		return nil, fmt.Errorf("CRS %s to longitude and latitude: %w", crsName(crsWKT), err)
	}
	return e, nil
}

// Close releases the transforms and spatial references.
func (e *equalArea) Close() {
	for _, f := range e.frames {
		f.tr.Close()
		f.sr.Close()
	}
	e.frames = nil
	if e.toGeo != nil {
		e.toGeo.Close()
	}
	for _, sr := range []*godal.SpatialRef{e.geo, e.src} {
		if sr != nil {
			sr.Close()
		}
	}
}

// lonLat takes points of the CRS to longitude and latitude, in place.
func (e *equalArea) lonLat(xs, ys []float64) error {
	if err := e.toGeo.TransformEx(xs, ys, nil, nil); err != nil {
		return fmt.Errorf("to longitude and latitude: %w", err)
	}
	return nil
}

// frame returns the transform from the CRS to the LAEA plane centred on
// (lon, lat) in degrees, made once per centre.
func (e *equalArea) frame(lon, lat float64) (*godal.Transform, error) {
	key := [2]float64{lon, lat}
	if f, ok := e.frames[key]; ok {
		return f.tr, nil
	}
	sr, err := godal.NewSpatialRefFromProj4(fmt.Sprintf("+proj=laea +lat_0=%.12g +lon_0=%.12g +x_0=0 +y_0=0 +a=%.17g +b=%.17g +units=m +no_defs", lat, lon, e.a, e.b), errLogger)
	if err != nil {
		return nil, fmt.Errorf("equal-area plane at %g,%g: %w", lon, lat, err)
	}
	tr, err := godal.NewTransform(e.src, sr, errLogger)
	if err != nil {
		sr.Close()
		return nil, fmt.Errorf("equal-area plane at %g,%g: %w", lon, lat, err)
	}
	e.frames[key] = &laeaFrame{sr: sr, tr: tr}
	return tr, nil
}

// centredFrame returns the plane centred on the CRS point (x, y), its centre
// snapped to the frameStep lattice when snap is set.
func (e *equalArea) centredFrame(x, y float64, snap bool) (*godal.Transform, error) {
	xs, ys := []float64{x}, []float64{y}
	if err := e.lonLat(xs, ys); err != nil {
		return nil, err
	}
	lon, lat := xs[0], ys[0]
	if snap {
		lon, lat = frameStep*math.Round(lon/frameStep), frameStep*math.Round(lat/frameStep)
	}
	return e.frame(lon, lat)
}

// area returns the ground area of a polygon or multipolygon g in the CRS,
// in m². g is transformed in place. Long edges are first cut into pieces of
// at most maxSegment on the ground.
func (e *equalArea) area(g *godal.Geometry, snap bool) (float64, error) {
	switch g.Type() {
	case godal.GTPolygon, godal.GTMultiPolygon, godal.GTPolygon25D, godal.GTMultiPolygon25D:
	default:
		return 0, fmt.Errorf("a %s is not a polygon", g.Name())
	}
	bb, err := g.Bounds()
	if err != nil {
		return 0, err
	}
	tr, err := e.centredFrame((bb[0]+bb[2])/2, (bb[1]+bb[3])/2, snap)
	if err != nil {
		return 0, err
	}
	xs, ys := []float64{bb[0], bb[2]}, []float64{bb[1], bb[3]}
	if err := tr.TransformEx(xs, ys, nil, nil); err != nil {
		return 0, fmt.Errorf("to the equal-area plane: %w", err)
	}
	if ground := math.Hypot(xs[1]-xs[0], ys[1]-ys[0]); ground > maxSegment {
		C.OGR_G_Segmentize(geometryHandle(g), C.double(math.Hypot(bb[2]-bb[0], bb[3]-bb[1])*maxSegment/ground))
	}
	if err := g.Transform(tr, errLogger); err != nil {
		return 0, fmt.Errorf("to the equal-area plane: %w", err)
	}
	return g.Area(), nil
}

// PolygonArea returns the ground area (m²) of a polygon given as WKT in the
// CRS crsWKT, by a local equal-area computation: the polygon is taken to a
// LAEA centred on it, on the CRS's ellipsoid, and its planar area measured
// there (GDAL/OGR geometry area). Edges longer than 25 km on the ground are
// first cut into shorter ones. It returns ErrNoCRS when crsWKT is empty.
func PolygonArea(polygonWKT, crsWKT string) (float64, error) {
	e, err := newEqualArea(crsWKT)
	if err != nil {
		return 0, fmt.Errorf("polygon area: %w", err)
	}
	defer e.Close()
	g, err := godal.NewGeometryFromWKT(polygonWKT, nil, errLogger)
	if err != nil {
		return 0, fmt.Errorf("polygon area: read WKT: %w", err)
	}
	defer g.Close()
	a, err := e.area(g, false)
	if err != nil {
		return 0, fmt.Errorf("polygon area: %w", err)
	}
	return a, nil
}

// CellAreas holds the ground area (m²) of the grid's pixels: per row, and per
// block of columns (64; fewer for pixels coarser than 780 m, more on grids
// too large for a 32 MiB table),
// computed by taking the cell corners to a Lambert azimuthal equal-area
// projection centred on the scene (PROJ's LAEA on the CRS's ellipsoid is
// equal-area, so areas there are ground areas) and the shoelace formula. The
// value of a block is the area of its strip of pixels divided by their
// number. It works for projected CRSs in any linear unit (metres, US survey
// feet ...) and geographic CRSs (degrees); grid area in a projected CRS is
// not ground area (Web Mercator is off by about 2x at 45 degrees).
//
// Scenes wider than 30 degrees of arc are cut into tiles, each on its own
// plane centred on it, and cell edges are cut into pieces of at most 25 km
// on the ground, so global and coarse grids are measured as well.
type CellAreas struct {
	width, height int
	block, blocks int
	area          []float64 // mean pixel area of block b of row r at r*blocks+b
	mean          float64
}

// NewCellAreas computes the cell areas of g. It returns ErrNoCRS when g has
// no CRS, and an error when it has no geotransform.
func NewCellAreas(g Grid) (*CellAreas, error) {
	if g.Projection == "" {
		return nil, fmt.Errorf("cell areas: %w", ErrNoCRS)
	}
	if !g.HasGeoTransform {
		return nil, errors.New("cell areas: the grid has no geotransform")
	}
	if g.Width <= 0 || g.Height <= 0 {
		return nil, fmt.Errorf("cell areas: empty grid %dx%d", g.Width, g.Height)
	}
	e, err := newEqualArea(g.Projection)
	if err != nil {
		return nil, fmt.Errorf("cell areas: %w", err)
	}
	defer e.Close()
	wide, high, err := arcSpans(e, g)
	if err != nil {
		return nil, fmt.Errorf("cell areas: %w", err)
	}
	// Ground size (m) of the widest pixels.
	pixW, pixH := wide*earthRadius/float64(g.Width), high*earthRadius/float64(g.Height)
	// A block spans at most two segments, so that areas varying along a
	// row (coarse projected grids) are followed too.
	c := &CellAreas{width: g.Width, height: g.Height, block: max(1, min(cellBlock, int(2*maxSegment/pixW)))}
	for g.Height*ceilDiv(g.Width, c.block) > maxCellValues {
		c.block *= 2
	}
	c.blocks = ceilDiv(g.Width, c.block)
	c.area = make([]float64, g.Height*c.blocks)
	s := cellSampling{
		g: g, c: c,
		subX: max(1, int(math.Ceil(float64(c.block)*pixW/maxSegment))),
		subY: max(1, int(math.Ceil(pixH/maxSegment))),
	}
	tilesX, tilesY := max(1, int(math.Ceil(wide/maxSpan))), max(1, int(math.Ceil(high/maxSpan)))
	blocksPer, rowsPer := ceilDiv(c.blocks, tilesX), ceilDiv(g.Height, tilesY)
	var total float64
	for r0 := 0; r0 < g.Height; r0 += rowsPer {
		for b0 := 0; b0 < c.blocks; b0 += blocksPer {
			r1, b1 := min(r0+rowsPer, g.Height), min(b0+blocksPer, c.blocks)
			cx := float64(b0*c.block+min(b1*c.block, g.Width)) / 2
			x, y := applyGT(g.GeoTransform, cx, float64(r0+r1)/2)
			tr, err := e.centredFrame(x, y, false)
			if err != nil {
				return nil, fmt.Errorf("cell areas: %w", err)
			}
			t, err := s.tile(tr, r0, r1, b0, b1)
			if err != nil {
				return nil, fmt.Errorf("cell areas: %w", err)
			}
			total += t
		}
	}
	c.mean = total / (float64(g.Width) * float64(g.Height))
	return c, nil
}

// At returns the ground area (m²) of pixel (col, row).
func (a *CellAreas) At(col, row int) float64 {
	if col < 0 || col >= a.width || row < 0 || row >= a.height {
		panic(fmt.Sprintf("raster: cell (%d,%d) outside a %dx%d grid", col, row, a.width, a.height))
	}
	return a.area[row*a.blocks+col/a.block]
}

// Mean returns the mean pixel area (m²) of the grid, for converting an area
// (m², ha) to a pixel count such as a minimum mapping unit.
func (a *CellAreas) Mean() float64 { return a.mean }

// cellSampling measures strips of one row by one block of columns: their
// top and bottom edges are sampled subX times per block, their sides subY
// times per row.
type cellSampling struct {
	g          Grid
	c          *CellAreas
	subX, subY int
	// reused buffers
	rx, ry []float64
}

// tile fills the areas of rows r0..r1-1, blocks b0..b1-1 measured on the
// plane of tr, and returns their total.
func (s *cellSampling) tile(tr *godal.Transform, r0, r1, b0, b1 int) (float64, error) {
	c := s.c
	colsOf := func(b int) (int, int) { return b * c.block, min((b+1)*c.block, s.g.Width) }
	// Columns sampled along horizontal lines; block b-b0 starts at index
	// (b-b0)*subX and ends subX further.
	var cols []float64
	for b := b0; b < b1; b++ {
		lo, hi := colsOf(b)
		for k := range s.subX {
			cols = append(cols, float64(lo)+float64(hi-lo)*float64(k)/float64(s.subX))
		}
	}
	_, end := colsOf(b1 - 1)
	cols = append(cols, float64(end))
	edges := make([]float64, 0, b1-b0+1) // block boundaries
	for i := 0; i < len(cols); i += s.subX {
		edges = append(edges, cols[i])
	}
	line := func(row float64) ([]float64, []float64, error) {
		return s.project(tr, cols, nil, row)
	}
	topX, topY, err := line(float64(r0))
	if err != nil {
		return 0, err
	}
	var total float64
	for r := r0; r < r1; r++ {
		botX, botY, err := line(float64(r + 1))
		if err != nil {
			return 0, err
		}
		// Inner points of the block sides, subY-1 per side, top to bottom.
		var sideX, sideY []float64
		if s.subY > 1 {
			var xs, ys []float64
			for _, x := range edges {
				for k := 1; k < s.subY; k++ {
					xs = append(xs, x)
					ys = append(ys, float64(r)+float64(k)/float64(s.subY))
				}
			}
			if sideX, sideY, err = s.project(tr, xs, ys, 0); err != nil {
				return 0, err
			}
		}
		n := s.subY - 1
		for b := b0; b < b1; b++ {
			i, j := (b-b0)*s.subX, b-b0
			s.rx, s.ry = s.rx[:0], s.ry[:0]
			s.rx, s.ry = append(s.rx, topX[i:i+s.subX+1]...), append(s.ry, topY[i:i+s.subX+1]...)
			s.rx, s.ry = append(s.rx, sideX[(j+1)*n:(j+2)*n]...), append(s.ry, sideY[(j+1)*n:(j+2)*n]...)
			for k := i + s.subX; k >= i; k-- {
				s.rx, s.ry = append(s.rx, botX[k]), append(s.ry, botY[k])
			}
			for k := j*n + n - 1; k >= j*n; k-- {
				s.rx, s.ry = append(s.rx, sideX[k]), append(s.ry, sideY[k])
			}
			lo, hi := colsOf(b)
			a := math.Abs(shoelace(s.rx, s.ry))
			c.area[r*c.blocks+b] = a / float64(hi-lo)
			total += a
		}
		topX, topY = botX, botY
	}
	return total, nil
}

// project takes pixel positions (cols, rows; rows nil for all at row) to
// the plane of tr.
func (s *cellSampling) project(tr *godal.Transform, cols, rows []float64, row float64) ([]float64, []float64, error) {
	xs, ys := make([]float64, len(cols)), make([]float64, len(cols))
	for i, col := range cols {
		if rows != nil {
			row = rows[i]
		}
		xs[i], ys[i] = applyGT(s.g.GeoTransform, col, row)
	}
	if err := tr.TransformEx(xs, ys, nil, nil); err != nil {
		return nil, nil, fmt.Errorf("to the equal-area plane: %w", err)
	}
	return xs, ys, nil
}

// arcSpans estimates the widest and highest extent of the grid, as arcs of a
// sphere (radians), from a lattice of points along its edges and middle.
func arcSpans(e *equalArea, g Grid) (wide, high float64, err error) {
	const n = 16
	for _, across := range []bool{true, false} {
		for _, f := range []float64{0, 0.5, 1} {
			xs, ys := make([]float64, n+1), make([]float64, n+1)
			for i := range xs {
				col, row := float64(g.Width)*float64(i)/n, float64(g.Height)*f
				if !across {
					col, row = float64(g.Width)*f, float64(g.Height)*float64(i)/n
				}
				xs[i], ys[i] = applyGT(g.GeoTransform, col, row)
			}
			if err := e.lonLat(xs, ys); err != nil {
				return 0, 0, err
			}
			var arc float64
			for i := 1; i <= n; i++ {
				arc += haversine(xs[i-1], ys[i-1], xs[i], ys[i])
			}
			if across {
				wide = max(wide, arc)
			} else {
				high = max(high, arc)
			}
		}
	}
	return wide, high, nil
}

// haversine returns the arc (radians) between two points given in degrees.
func haversine(lon1, lat1, lon2, lat2 float64) float64 {
	p1, p2 := lat1*math.Pi/180, lat2*math.Pi/180
	dp, dl := p2-p1, (lon2-lon1)*math.Pi/180
	h := math.Sin(dp/2)*math.Sin(dp/2) + math.Cos(p1)*math.Cos(p2)*math.Sin(dl/2)*math.Sin(dl/2)
	return 2 * math.Asin(math.Sqrt(min(1, h)))
}

// shoelace returns the signed area of the closed ring (xs, ys), taken
// relative to its first point so that small cells far from the plane's
// centre keep their precision.
func shoelace(xs, ys []float64) float64 {
	var s float64
	for i := range xs {
		j := (i + 1) % len(xs)
		s += (xs[i]-xs[0])*(ys[j]-ys[0]) - (xs[j]-xs[0])*(ys[i]-ys[0])
	}
	return s / 2
}

// applyGT maps pixel position (col, row) to georeferenced coordinates.
func applyGT(gt [6]float64, col, row float64) (float64, float64) {
	return gt[0] + col*gt[1] + row*gt[2], gt[3] + col*gt[4] + row*gt[5]
}

func ceilDiv(a, b int) int { return (a + b - 1) / b }
