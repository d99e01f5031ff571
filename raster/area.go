package raster

/*
#cgo pkg-config: proj
#cgo LDFLAGS: -lm
#include <math.h>
#include <stdlib.h>
#include <geodesic.h>
#include <ogr_api.h>

// bandfoldPolygonArea returns the area (m², positive) of the geodesic
// polygon through the n points (lon, lat), in degrees, on g: PROJ's
// geod_polygonarea (Karney 2013, §6), which closes the ring itself.
static double bandfoldPolygonArea(const struct geod_geodesic *g, double *lon, double *lat, int n) {
	double a = 0;
	geod_polygonarea(g, lat, lon, n, &a, NULL);
	return a < 0 ? -a : a;
}

// bandfoldRingArea returns the area (m², positive) of the ring of OGR
// geometry ring, its points longitude and latitude in degrees, as a
// geodesic polygon on g, leaving out the point that closes it. It returns
// -1 when out of memory.
static double bandfoldRingArea(const struct geod_geodesic *g, OGRGeometryH ring) {
	int n = OGR_G_GetPointCount(ring);
	if (n > 1 && OGR_G_GetX(ring, 0) == OGR_G_GetX(ring, n - 1) && OGR_G_GetY(ring, 0) == OGR_G_GetY(ring, n - 1)) {
		n--;
	}
	if (n < 3) {
		return 0;
	}
	double *lon = malloc(2 * n * sizeof(double));
	if (lon == NULL) {
		return -1;
	}
	double *lat = lon + n;
	for (int i = 0; i < n; i++) {
		lon[i] = OGR_G_GetX(ring, i);
		lat[i] = OGR_G_GetY(ring, i);
	}
	double a = bandfoldPolygonArea(g, lon, lat, n);
	free(lon);
	return a;
}

// bandfoldGeodesicArea returns the area (m²) of polygon or multipolygon
// geom in longitude and latitude: each polygon's outer ring less its
// holes. It returns -1 when out of memory.
static double bandfoldGeodesicArea(const struct geod_geodesic *g, OGRGeometryH geom) {
	OGRwkbGeometryType t = wkbFlatten(OGR_G_GetGeometryType(geom));
	if (t == wkbMultiPolygon) {
		double sum = 0;
		for (int i = 0; i < OGR_G_GetGeometryCount(geom); i++) {
			double a = bandfoldGeodesicArea(g, OGR_G_GetGeometryRef(geom, i));
			if (a < 0) {
				return -1;
			}
			sum += a;
		}
		return sum;
	}
	double sum = 0;
	for (int i = 0; i < OGR_G_GetGeometryCount(geom); i++) {
		double a = bandfoldRingArea(g, OGR_G_GetGeometryRef(geom, i));
		if (a < 0) {
			return -1;
		}
		sum += i == 0 ? a : -a;
	}
	return sum;
}

// bandfoldStripArea returns the area (m², positive) of block b of a row
// of cells as a geodesic polygon: the ring along the
// top line top[b*subx .. (b+1)*subx], down the inner points of side b+1,
// back along the bottom line and up the inner points of side b, each
// longitude and latitude in degrees, subyi inner points a side. It
// returns -1 when out of memory.
static double bandfoldStripArea(const struct geod_geodesic *g, int b, int subx, int subyi,
	const double *topLon, const double *topLat, const double *botLon, const double *botLat,
	const double *sideLon, const double *sideLat) {
	int most = 2 * (subx + 1) + 2 * subyi, n = 0, i = b * subx;
	double *lon = malloc(2 * most * sizeof(double));
	if (lon == NULL) {
		return -1;
	}
	double *lat = lon + most;
	for (int k = i; k <= i + subx; k++, n++) {
		lon[n] = topLon[k], lat[n] = topLat[k];
	}
	for (int k = (b + 1) * subyi; k < (b + 2) * subyi; k++, n++) {
		lon[n] = sideLon[k], lat[n] = sideLat[k];
	}
	for (int k = i + subx; k >= i; k--, n++) {
		lon[n] = botLon[k], lat[n] = botLat[k];
	}
	for (int k = b * subyi + subyi - 1; k >= b * subyi; k--, n++) {
		lon[n] = sideLon[k], lat[n] = sideLat[k];
	}
	double a = bandfoldPolygonArea(g, lon, lat, n);
	free(lon);
	return a;
}

// bandfoldEdge sets *s12 to the area between the geodesic from point 1 to
// point 2 and the equator (geod_geninverse's S12) and *dlon to its change
// of longitude, in (-180, 180].
static void bandfoldEdge(const struct geod_geodesic *g, double lon1, double lat1, double lon2, double lat2, double *s12, double *dlon) {
	geod_geninverse(g, lat1, lon1, lat2, lon2, NULL, NULL, NULL, NULL, NULL, NULL, s12);
	*dlon = remainder(lon2 - lon1, 360.0);
}

// bandfoldRowAreas fills area[b] (m²) for the blocks of a row of cells.
// The top line's edges (tS12, tLon, subx per block) come from the row
// above; the bottom line's (bS12, bLon) are computed here from its points,
// and so are the sides' (subyi inner points each). The area of a ring
// that does not go round a pole is the sum of the S12 of its edges, which
// is how geod_polygonarea computes it (Karney 2013, §6): summed here, every
// edge is measured once for the two cells that share it, which halves the
// work. A cell with a corner near a pole, or whose ring turns round one
// (its longitude changes do not sum to zero), is left to geod_polygonarea,
// which handles those. It returns -1 when out of memory.
static int bandfoldRowAreas(const struct geod_geodesic *g, int blocks, int subx, int subyi,
	const double *topLon, const double *topLat, const double *botLon, const double *botLat,
	const double *sideLon, const double *sideLat,
	const double *tS12, const double *tLon, double *bS12, double *bLon, double *sS12, double *sLon, double *area) {
	int m = blocks * subx, per = subyi + 1;
	for (int i = 0; i < m; i++) {
		bandfoldEdge(g, botLon[i], botLat[i], botLon[i + 1], botLat[i + 1], &bS12[i], &bLon[i]);
	}
	for (int j = 0; j <= blocks; j++) {
		double plon = topLon[j * subx], plat = topLat[j * subx];
		for (int k = 0; k < per; k++) {
			double qlon = k < subyi ? sideLon[j * subyi + k] : botLon[j * subx];
			double qlat = k < subyi ? sideLat[j * subyi + k] : botLat[j * subx];
			bandfoldEdge(g, plon, plat, qlon, qlat, &sS12[j * per + k], &sLon[j * per + k]);
			plon = qlon, plat = qlat;
		}
	}
	for (int b = 0; b < blocks; b++) {
		double sum = 0, turn = 0;
		int pole = 0;
		for (int i = b * subx; i < (b + 1) * subx; i++) {
			sum += tS12[i] - bS12[i];
			turn += tLon[i] - bLon[i];
			pole |= fabs(topLat[i]) > 89.9 || fabs(botLat[i]) > 89.9;
		}
		pole |= fabs(topLat[(b + 1) * subx]) > 89.9 || fabs(botLat[(b + 1) * subx]) > 89.9;
		for (int k = 0; k < per; k++) {
			sum += sS12[(b + 1) * per + k] - sS12[b * per + k];
			turn += sLon[(b + 1) * per + k] - sLon[b * per + k];
		}
		if (pole || fabs(turn) > 180) {
			area[b] = bandfoldStripArea(g, b, subx, subyi, topLon, topLat, botLon, botLat, sideLon, sideLat);
			if (area[b] < 0) {
				return -1;
			}
			continue;
		}
		area[b] = fabs(sum);
	}
	return 0;
}

// bandfoldDistance returns the geodesic distance (m) between two points
// given in degrees.
static double bandfoldDistance(const struct geod_geodesic *g, double lon1, double lat1, double lon2, double lat2) {
	double s12 = 0;
	geod_inverse(g, lat1, lon1, lat2, lon2, &s12, NULL, NULL);
	return s12;
}
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
	// maxPiece is the longest ground distance (m) between consecutive
	// points of an edge taken to longitude and latitude: the geodesic
	// between them stands for the image of a straight edge of the source
	// CRS; the difference falls with the square of the piece's length. At
	// 1 km, measured: below 1e-9 of a cell's area on 30 m transverse
	// Mercator grids (against the integral of Snyder's scale factor) and
	// Lambert conformal conic ones (against pieces of 30 m), 5e-9 on
	// geographic grids up to 2° (against Snyder's closed form).
	maxPiece = 1e3
	// blockSpan is the ground width (m) of the columns sharing one area
	// value in a coarse grid: areas varying along a row are followed at
	// that step.
	blockSpan = 50e3
	// cellBlock is the default number of columns sharing one area value.
	cellBlock = 64
	// maxCellValues bounds the size of a CellAreas table (32 MiB).
	maxCellValues = 1 << 22
)

// geodesy takes coordinates of one CRS to longitude and latitude on the
// CRS's own ellipsoid and measures there with PROJ's geodesic routines
// (geodesic.h; Karney, "Algorithms for geodesics", J. Geodesy 87, 2013),
// through the PROJ library GDAL uses.
type geodesy struct {
	src, geo *godal.SpatialRef
	toGeo    *godal.Transform
	g        C.struct_geod_geodesic
}

func newGeodesy(crsWKT string) (*geodesy, error) {
	if crsWKT == "" {
		return nil, ErrNoCRS
	}
	src, err := godal.NewSpatialRefFromWKT(crsWKT, errLogger)
	if err != nil {
		return nil, fmt.Errorf("read CRS %s: %w", crsName(crsWKT), err)
	}
	e := &geodesy{src: src}
	a, errA := src.SemiMajor()
	b, errB := src.SemiMinor()
	if errA != nil || errB != nil || !(a > 0 && b > 0) {
		e.Close()
		return nil, fmt.Errorf("CRS %s: no ellipsoid", crsName(crsWKT))
	}
	C.geod_init(&e.g, C.double(a), C.double((a-b)/a))
	// Longitude and latitude on the same ellipsoid (no datum shift).
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

// Close releases the transform and spatial references.
func (e *geodesy) Close() {
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
func (e *geodesy) lonLat(xs, ys []float64) error {
	if err := e.toGeo.TransformEx(xs, ys, nil, nil); err != nil {
		return fmt.Errorf("to longitude and latitude: %w", err)
	}
	return nil
}

// distance returns the geodesic distance (m) between two points given in
// longitude and latitude.
func (e *geodesy) distance(lon1, lat1, lon2, lat2 float64) float64 {
	return float64(C.bandfoldDistance(&e.g, C.double(lon1), C.double(lat1), C.double(lon2), C.double(lat2)))
}

// area returns the ground area of a polygon or multipolygon g in the CRS,
// in m². g is transformed in place: its edges are first cut into pieces of
// at most maxPiece on the ground, then taken to longitude and latitude.
func (e *geodesy) area(g *godal.Geometry) (float64, error) {
	switch g.Type() {
	case godal.GTPolygon, godal.GTMultiPolygon, godal.GTPolygon25D, godal.GTMultiPolygon25D:
	default:
		return 0, fmt.Errorf("a %s is not a polygon", g.Name())
	}
	bb, err := g.Bounds()
	if err != nil {
		return 0, err
	}
	xs, ys := []float64{bb[0], bb[2]}, []float64{bb[1], bb[3]}
	if err := e.lonLat(xs, ys); err != nil {
		return 0, err
	}
	if ground := e.distance(xs[0], ys[0], xs[1], ys[1]); ground > maxPiece {
		C.OGR_G_Segmentize(geometryHandle(g), C.double(math.Hypot(bb[2]-bb[0], bb[3]-bb[1])*maxPiece/ground))
	}
	if err := g.Transform(e.toGeo, errLogger); err != nil {
		return 0, fmt.Errorf("to longitude and latitude: %w", err)
	}
	a := float64(C.bandfoldGeodesicArea(&e.g, geometryHandle(g)))
	if a < 0 {
		return 0, errors.New("out of memory")
	}
	return a, nil
}

// PolygonArea returns the ground area (m²) of a polygon given as WKT in the
// CRS crsWKT: its edges cut into pieces of at most 1 km on the ground, the
// polygon is taken to longitude and latitude on the CRS's ellipsoid and
// measured as a geodesic polygon by PROJ (geod_polygonarea; Karney 2013),
// outer rings less holes. It returns ErrNoCRS when crsWKT is empty.
func PolygonArea(polygonWKT, crsWKT string) (float64, error) {
	e, err := newGeodesy(crsWKT)
	if err != nil {
		return 0, fmt.Errorf("polygon area: %w", err)
	}
	defer e.Close()
	g, err := godal.NewGeometryFromWKT(polygonWKT, nil, errLogger)
	if err != nil {
		return 0, fmt.Errorf("polygon area: read WKT: %w", err)
	}
	defer g.Close()
	a, err := e.area(g)
	if err != nil {
		return 0, fmt.Errorf("polygon area: %w", err)
	}
	return a, nil
}

// CellAreas holds the ground area (m²) of the grid's pixels: per row, and per
// block of columns (64; fewer for pixels coarser than 780 m, more on grids
// too large for a 32 MiB table). The value of a block is the area of its
// strip of pixels divided by their number, the strip measured as a
// geodesic polygon on the CRS's ellipsoid with PROJ's geodesic routines
// (Karney 2013) through its corners and, on edges longer than 1 km on the
// ground, points at most 1 km apart. It works for projected CRSs in any
// linear unit (metres, US survey feet ...) and geographic CRSs (degrees),
// across the antimeridian and up to the poles; grid area in a projected
// CRS is not ground area (Web Mercator is off by about 2x at 45 degrees).
type CellAreas struct {
	width, height int
	block, blocks int
	area          []float64 // mean pixel area of block b of row r at r*blocks+b
	mean          float64
	// alike counts the rows measured by their first block (sameAlongRow).
	alike int
}

// NewCellAreas computes the cell areas of g. It returns ErrNoCRS when g has
// no CRS, and an error when it has no geotransform.
func NewCellAreas(g Grid) (*CellAreas, error) { return newCellAreas(g, false) }

// newCellAreas is NewCellAreas; everyBlock measures every block of every
// row, also where sameAlongRow would measure the first alone.
func newCellAreas(g Grid, everyBlock bool) (*CellAreas, error) {
	if g.Projection == "" {
		return nil, fmt.Errorf("cell areas: %w", ErrNoCRS)
	}
	if !g.HasGeoTransform {
		return nil, errors.New("cell areas: the grid has no geotransform")
	}
	if g.Width <= 0 || g.Height <= 0 {
		return nil, fmt.Errorf("cell areas: empty grid %dx%d", g.Width, g.Height)
	}
	e, err := newGeodesy(g.Projection)
	if err != nil {
		return nil, fmt.Errorf("cell areas: %w", err)
	}
	defer e.Close()
	wide, high, err := groundSpans(e, g)
	if err != nil {
		return nil, fmt.Errorf("cell areas: %w", err)
	}
	// Ground size (m) of the widest pixels.
	pixW, pixH := wide/float64(g.Width), high/float64(g.Height)
	c := &CellAreas{width: g.Width, height: g.Height, block: max(1, min(cellBlock, int(blockSpan/pixW)))}
	for g.Height*ceilDiv(g.Width, c.block) > maxCellValues {
		c.block *= 2
	}
	c.blocks = ceilDiv(g.Width, c.block)
	c.area = make([]float64, g.Height*c.blocks)
	s := cellSampling{
		g: g, c: c, e: e,
		subX:       max(1, int(math.Ceil(float64(c.block)*pixW/maxPiece))),
		subY:       max(1, int(math.Ceil(pixH/maxPiece))),
		everyBlock: everyBlock,
	}
	total, err := s.measure()
	if err != nil {
		return nil, fmt.Errorf("cell areas: %w", err)
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

// Row returns the areas of row's blocks of columns and the block width:
// pixel (col, row) has area blocks[col/width], as At gives it, for loops
// over a row that would otherwise look every pixel up on its own.
func (a *CellAreas) Row(row int) (blocks []float64, width int) {
	if row < 0 || row >= a.height {
		panic(fmt.Sprintf("raster: row %d outside a %dx%d grid", row, a.width, a.height))
	}
	return a.area[row*a.blocks : (row+1)*a.blocks], a.block
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
	e          *geodesy
	subX, subY int
	row        []float64 // the areas of a row's blocks
	// S12 and longitude changes of the edges of the top and bottom lines
	// and of the sides (geod_geninverse's S12, bandfoldRowAreas); the top
	// line's are stale after a row measured by block 0 alone.
	tS12, tLon, bS12, bLon, sS12, sLon []float64
	topStale                           bool
	// everyBlock measures every block of every row (tests compare the
	// shortcut of sameAlongRow with it).
	everyBlock bool
}

// measure fills the areas of every block and row, and returns their total.
func (s *cellSampling) measure() (float64, error) {
	c := s.c
	// Columns sampled along horizontal lines; block b starts at index
	// b*subX and ends subX further.
	cols := make([]float64, 0, c.blocks*s.subX+1)
	for b := range c.blocks {
		lo, hi := s.colsOf(b)
		for k := range s.subX {
			cols = append(cols, float64(lo)+float64(hi-lo)*float64(k)/float64(s.subX))
		}
	}
	cols = append(cols, float64(s.g.Width))
	topX, topY, err := s.project(cols, nil, 0)
	if err != nil {
		return 0, err
	}
	var total float64
	for r := range s.g.Height {
		botX, botY, err := s.project(cols, nil, float64(r+1))
		if err != nil {
			return 0, err
		}
		sideX, sideY, err := s.sides(cols, r)
		if err != nil {
			return 0, err
		}
		measure := s.strips
		if s.sameAlongRow(topX, topY, botX, botY, sideX, sideY) {
			measure = s.firstBlock
		}
		if err := measure(topX, topY, botX, botY, sideX, sideY); err != nil {
			return 0, err
		}
		for b, a := range s.row {
			lo, hi := s.colsOf(b)
			c.area[r*c.blocks+b] = a / float64(hi-lo)
			total += a
		}
		topX, topY = botX, botY
	}
	return total, nil
}

// colsOf returns the columns of block b.
func (s *cellSampling) colsOf(b int) (int, int) {
	return b * s.c.block, min((b+1)*s.c.block, s.g.Width)
}

// sides returns the inner points of the block sides of row r, subY-1 per
// side, top to bottom, block boundary by block boundary.
func (s *cellSampling) sides(cols []float64, r int) ([]float64, []float64, error) {
	if s.subY <= 1 {
		return nil, nil, nil
	}
	var xs, ys []float64
	for i := 0; i < len(cols); i += s.subX {
		for k := 1; k < s.subY; k++ {
			xs = append(xs, cols[i])
			ys = append(ys, float64(r)+float64(k)/float64(s.subY))
		}
	}
	return s.project(xs, ys, 0)
}

// strips measures the blocks of a row into s.row, from its top and bottom
// lines and the inner points of its block sides in longitude and latitude;
// the bottom line's edges are kept for the row below.
func (s *cellSampling) strips(topX, topY, botX, botY, sideX, sideY []float64) error {
	m, per := len(topX)-1, s.subY
	if s.tS12 == nil {
		s.sS12, s.sLon = make([]float64, (s.c.blocks+1)*per), make([]float64, (s.c.blocks+1)*per)
		s.bS12, s.bLon = make([]float64, m), make([]float64, m)
		s.tS12, s.tLon = make([]float64, m), make([]float64, m)
		s.topStale = true
	}
	if s.topStale {
		for i := range m {
			C.bandfoldEdge(&s.e.g, C.double(topX[i]), C.double(topY[i]), C.double(topX[i+1]), C.double(topY[i+1]),
				(*C.double)(&s.tS12[i]), (*C.double)(&s.tLon[i]))
		}
		s.topStale = false
	}
	if s.row == nil {
		s.row = make([]float64, s.c.blocks)
	}
	if C.bandfoldRowAreas(&s.e.g, C.int(s.c.blocks), C.int(s.subX), C.int(s.subY-1),
		cPtr(topX), cPtr(topY), cPtr(botX), cPtr(botY), cPtr(sideX), cPtr(sideY),
		cPtr(s.tS12), cPtr(s.tLon), cPtr(s.bS12), cPtr(s.bLon), cPtr(s.sS12), cPtr(s.sLon), cPtr(s.row)) != 0 {
		return errors.New("out of memory")
	}
	s.tS12, s.bS12 = s.bS12, s.tS12
	s.tLon, s.bLon = s.bLon, s.tLon
	return nil
}

// cPtr is the address of v's first value for C, nil when v is empty.
func cPtr(v []float64) *C.double {
	if len(v) == 0 {
		return nil
	}
	return (*C.double)(&v[0])
}

// sameAlongRow reports whether every whole block of a row is its first
// block turned about the polar axis: on a north-up grid whose rows are
// parallels and whose columns step evenly in longitude (a geographic
// grid, or a cylindrical projection such as Mercator), each whole block's
// ring, points of its top and bottom lines and sides, is block 0's with
// every longitude shifted by one amount and every latitude the same. The
// ellipsoid being symmetric about its axis, such blocks have block 0's
// area. The rings are compared to 1e-10 of a block's width in longitude,
// a shift that moves no area by more than about 1e-10 of the block's.
func (s *cellSampling) sameAlongRow(topX, topY, botX, botY, sideX, sideY []float64) bool {
	n, in := s.subX, s.subY-1
	whole := s.g.Width / s.c.block
	if s.everyBlock || whole < 2 || s.g.GeoTransform[2] != 0 || s.g.GeoTransform[4] != 0 {
		return false
	}
	tol := 1e-10 * math.Abs(topX[n]-topX[0])
	near := func(a, b float64) bool { return math.Abs(a-b) <= tol }
	for b := 1; b < whole; b++ {
		shift := topX[b*n] - topX[0]
		same := func(xs, ys []float64, i, i0 int) bool { return near(xs[i]-shift, xs[i0]) && near(ys[i], ys[i0]) }
		for k := 0; k <= n; k++ {
			if !same(topX, topY, b*n+k, k) || !same(botX, botY, b*n+k, k) {
				return false
			}
		}
		for k := 0; k < 2*in; k++ { // the inner points of sides b and b+1
			if !same(sideX, sideY, b*in+k, k) {
				return false
			}
		}
	}
	return tol > 0
}

// firstBlock measures a row whose whole blocks all have block 0's area
// (sameAlongRow): block 0, and the last block when narrower, each as a
// geodesic polygon (bandfoldStripArea), the others taking block 0's.
func (s *cellSampling) firstBlock(topX, topY, botX, botY, sideX, sideY []float64) error {
	if s.row == nil {
		s.row = make([]float64, s.c.blocks)
	}
	strip := func(b int) error {
		a := C.bandfoldStripArea(&s.e.g, C.int(b), C.int(s.subX), C.int(s.subY-1),
			cPtr(topX), cPtr(topY), cPtr(botX), cPtr(botY), cPtr(sideX), cPtr(sideY))
		if a < 0 {
			return errors.New("out of memory")
		}
		s.row[b] = float64(a)
		return nil
	}
	if err := strip(0); err != nil {
		return err
	}
	whole := s.g.Width / s.c.block
	for b := 1; b < whole; b++ {
		s.row[b] = s.row[0]
	}
	s.topStale = true
	s.c.alike++
	if whole < s.c.blocks {
		return strip(s.c.blocks - 1)
	}
	return nil
}

// project takes pixel positions (cols, rows; rows nil for all at row) to
// longitude and latitude.
func (s *cellSampling) project(cols, rows []float64, row float64) ([]float64, []float64, error) {
	xs, ys := make([]float64, len(cols)), make([]float64, len(cols))
	for i, col := range cols {
		if rows != nil {
			row = rows[i]
		}
		xs[i], ys[i] = applyGT(s.g.GeoTransform, col, row)
	}
	if err := s.e.lonLat(xs, ys); err != nil {
		return nil, nil, err
	}
	return xs, ys, nil
}

// groundSpans estimates the widest and highest ground extent (m) of the
// grid, along lines of a lattice across its edges and middle.
func groundSpans(e *geodesy, g Grid) (wide, high float64, err error) {
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
			var span float64
			for i := 1; i <= n; i++ {
				span += e.distance(xs[i-1], ys[i-1], xs[i], ys[i])
			}
			if across {
				wide = max(wide, span)
			} else {
				high = max(high, span)
			}
		}
	}
	return wide, high, nil
}

// applyGT maps pixel position (col, row) to georeferenced coordinates.
func applyGT(gt [6]float64, col, row float64) (float64, float64) {
	return gt[0] + col*gt[1] + row*gt[2], gt[3] + col*gt[4] + row*gt[5]
}

func ceilDiv(a, b int) int { return (a + b - 1) / b }
