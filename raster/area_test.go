package raster

import (
	"errors"
	"fmt"
	"math"
	"strings"
	"testing"

	"github.com/airbusgeo/godal"
)

// utmK0 is the scale factor of UTM on its central meridian (0.9996, by the
// definition of UTM): there, grid distances are ground distances times k0.
const utmK0 = 0.9996

// Ellipsoid constants of WGS84 (a, 1/f; from its definition).
const wgs84A, wgs84InvF = 6378137.0, 298.257223563

// lonLatBoxArea is the exact area (m²) of the WGS84 ellipsoid between two
// meridians and two parallels (degrees), the ellipsoidal quadrangle
//
//	A = (λ2 − λ1) b² [q(φ2) − q(φ1)] / 2,
//	q(φ) = sin φ / (1 − e² sin² φ) + 1/(2e) ln((1 + e sin φ) / (1 − e sin φ)),
//
// with b = a(1 − f) and e² = f(2 − f), so b² = a²(1 − e²). This is the
// authalic-latitude formula of Snyder (1987), Map Projections: A Working
// Manual, USGS Professional Paper 1395, eq. 3-12 and the text around it
// (Snyder's q carries the factor 1 − e², here moved into b²): the zone
// between the equator and φ over Δλ has area Δλ b² q(φ) / 2, so that the
// whole ellipsoid has 2π b² q(90°) = 4π R_q², R_q Snyder's authalic radius.
// It is written out here, independent of PROJ.
func lonLatBoxArea(lon1, lat1, lon2, lat2 float64) float64 {
	f := 1 / wgs84InvF
	b := wgs84A * (1 - f)
	e2 := f * (2 - f)
	e := math.Sqrt(e2)
	q := func(lat float64) float64 {
		s := math.Sin(lat * math.Pi / 180)
		return s/(1-e2*s*s) + math.Log((1+e*s)/(1-e*s))/(2*e)
	}
	return (lon2 - lon1) * math.Pi / 180 * b * b * (q(lat2) - q(lat1)) / 2
}

// TestLonLatBoxArea checks the closed form of lonLatBoxArea against PROJ's
// cylindrical equal-area projection on WGS84 (+proj=cea), which maps
// meridians and parallels to straight lines, so the box becomes a rectangle
// whose planar area is the box's ground area exactly, with no sampling.
// PROJ evaluates the same q, so the two differ by rounding only: about 1e-16
// relative in each q, magnified by the subtraction q(φ2) − q(φ1) (for a 1°
// box at 60°N, q changes by 1/100 of itself) to some 1e-14, so 1e-12.
// The boxes include the whole ellipsoid. (The areas under test come from
// PROJ's geodesic routines, geod_polygonarea, called directly: GDAL's own
// OGR_G_GeodesicArea needs GDAL 3.9, newer than the 3.6 bandfold builds on.)
func TestLonLatBoxArea(t *testing.T) {
	tr, _ := proj4Transform(t, "+proj=longlat +ellps=WGS84 +no_defs", "+proj=cea +lat_ts=0 +lon_0=0 +ellps=WGS84 +units=m +no_defs")
	for _, box := range [][4]float64{{0, 0, 1, 1}, {20, 60, 21, 61}, {0, 0, 10, 10}, {-180, -90, 180, 90}, {10, -35, 12.5, -34}} {
		xs, ys := []float64{box[0], box[2]}, []float64{box[1], box[3]}
		if err := tr.TransformEx(xs, ys, nil, nil); err != nil {
			t.Fatal(err)
		}
		want := (xs[1] - xs[0]) * (ys[1] - ys[0])
		if got := lonLatBoxArea(box[0], box[1], box[2], box[3]); relErr(got, want) > 1e-12 {
			t.Errorf("box %v: closed form %.15g m², PROJ cea %.15g m² (relative difference %.2g)", box, got, want, relErr(got, want))
		}
	}
}

// proj4Transform returns GDAL's transform between two CRSs given as PROJ
// strings (axis order longitude, latitude) and the first CRS as WKT; both
// are released when the test ends.
func proj4Transform(t *testing.T, from, to string) (*godal.Transform, string) {
	t.Helper()
	var srs []*godal.SpatialRef
	for _, p4 := range []string{from, to} {
		sr, err := godal.NewSpatialRefFromProj4(p4)
		if err != nil {
			t.Fatal(err)
		}
		t.Cleanup(sr.Close)
		srs = append(srs, sr)
	}
	tr, err := godal.NewTransform(srs[0], srs[1])
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(tr.Close)
	wkt, err := srs[0].WKT()
	if err != nil {
		t.Fatal(err)
	}
	return tr, wkt
}

func epsgWKT(t *testing.T, code int) string {
	t.Helper()
	wkt, err := EPSG(code)
	if err != nil {
		t.Fatal(err)
	}
	return wkt
}

func testGrid(t *testing.T, epsg, w, h int, gt [6]float64) Grid {
	t.Helper()
	g := Grid{Width: w, Height: h, GeoTransform: gt, HasGeoTransform: true}
	if epsg != 0 {
		g.Projection = epsgWKT(t, epsg)
	}
	return g
}

// reproject takes points from one EPSG CRS to another, in place, with GDAL
// directly (axis order longitude, latitude).
func reproject(t *testing.T, from, to int, xs, ys []float64) {
	t.Helper()
	src, err := godal.NewSpatialRefFromEPSG(from)
	if err != nil {
		t.Fatal(err)
	}
	defer src.Close()
	dst, err := godal.NewSpatialRefFromEPSG(to)
	if err != nil {
		t.Fatal(err)
	}
	defer dst.Close()
	tr, err := godal.NewTransform(src, dst)
	if err != nil {
		t.Fatal(err)
	}
	defer tr.Close()
	if err := tr.TransformEx(xs, ys, nil, nil); err != nil {
		t.Fatal(err)
	}
}

func relErr(got, want float64) float64 { return math.Abs(got-want) / math.Abs(want) }

// totalArea sums At over the grid and checks it against Mean, and Row
// against At.
func totalArea(t *testing.T, a *CellAreas, g Grid) float64 {
	t.Helper()
	var sum float64
	for r := range g.Height {
		blocks, width := a.Row(r)
		for c := range g.Width {
			sum += a.At(c, r)
			if blocks[c/width] != a.At(c, r) {
				t.Fatalf("Row(%d) gives %g for column %d, At %g", r, blocks[c/width], c, a.At(c, r))
			}
		}
	}
	if n := float64(g.Width * g.Height); relErr(sum/n, a.Mean()) > 1e-12 {
		t.Errorf("mean %g, but the pixels average %g", a.Mean(), sum/n)
	}
	return sum
}

func TestCellAreas(t *testing.T) {
	// A 1 km square of ground in UTM 33N centred on its central meridian
	// (15°E, easting 500000 m), 100 x 100 pixels of 10 m.
	utm := testGrid(t, utm33, 100, 100, [6]float64{499500, 10, 0, 4600500, 0, -10})
	// The same ground on its own EPSG:4326 grid: the square's corners in
	// longitude and latitude (on the central meridian the square's sides
	// follow meridians and parallels to within 1e-5 of its size).
	xs, ys := []float64{499500, 500500, 500500, 499500}, []float64{4600500, 4600500, 4599500, 4599500}
	reproject(t, utm33, 4326, xs, ys)
	west, east := (xs[0]+xs[3])/2, (xs[1]+xs[2])/2
	north, south := (ys[0]+ys[1])/2, (ys[2]+ys[3])/2
	geo := testGrid(t, 4326, 100, 100, [6]float64{west, (east - west) / 100, 0, north, 0, -(north - south) / 100})

	// NAD83 / New York Long Island in metres (EPSG:32118) and in US survey
	// feet (EPSG:2263): the same Lambert conformal conic, so a grid in feet
	// whose numbers are the metre grid's times 3937/1200 (ftUS per metre,
	// by the definition of the US survey foot) covers the same ground. The
	// cone's scale is 1 on its standard parallels (40°40'N, 41°02'N) and
	// within 1e-4 of it between them, so ground area is grid area in m².
	const ftUS = 3937.0 / 1200
	lim := testGrid(t, 32118, 100, 100, [6]float64{380000, 30, 0, 75000, 0, -30})
	lif := testGrid(t, 2263, 100, 100, [6]float64{380000 * ftUS, 30 * ftUS, 0, 75000 * ftUS, 0, -30 * ftUS})

	// Web Mercator (EPSG:3857) at 45°N: y = R ln tan(45° + φ/2) with
	// R = 6378137 m. Spherical Mercator stretches both axes by 1/cos φ, so
	// ground area is grid area times cos²(45°) = 1/2 (the ellipsoid's radii
	// of curvature at 45°N change that by 1e-5).
	y45 := wgs84A * math.Log(math.Tan(math.Pi/4+math.Pi/8))
	merc := testGrid(t, 3857, 100, 100, [6]float64{-500, 10, 0, y45 + 500, 0, -10})

	tests := []struct {
		name string
		g    Grid
		want float64 // ground area (m²) of the whole grid
		tol  float64
	}{
		{"UTM 33N", utm, 1e6 / (utmK0 * utmK0), 1e-4},
		{"EPSG:4326 same ground", geo, 1e6 / (utmK0 * utmK0), 5e-3},
		{"Long Island metres", lim, 3000 * 3000, 1e-4},
		{"Long Island US survey feet", lif, 3000 * 3000, 1e-4},
		{"Web Mercator 45N", merc, 1e6 / 2, 5e-3},
		// 1° x 1° at the equator: the closed form of the ellipsoidal
		// quadrangle (lonLatBoxArea, Snyder 1987 eq. 3-12), about
		// 12,308 km². NewCellAreas cuts each of the cell's 111 km edges into
		// 112 pieces (at most 1 km on the ground) and measures the geodesic
		// polygon through them (PROJ); its geodesics stand for the parallels
		// to 2e-9 of the area (measured), so 1e-8, as in the per-cell check
		// of TestCellAreasCoarseGeographic. (The hand-written equal-area
		// planes it replaces were within 5e-7 here.)
		{"1 degree at the equator", testGrid(t, 4326, 1, 1, [6]float64{0, 1, 0, 1, 0, -1}), lonLatBoxArea(0, 0, 1, 1), 1e-8},
	}
	totals := map[string]float64{}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			a, err := NewCellAreas(tc.g)
			if err != nil {
				t.Fatal(err)
			}
			got := totalArea(t, a, tc.g)
			totals[tc.name] = got
			if relErr(got, tc.want) > tc.tol {
				t.Errorf("area %.6g m², want %.6g (relative error %.2g > %g)", got, tc.want, relErr(got, tc.want), tc.tol)
			}
		})
	}
	// The same ground measured on two grids.
	for _, pair := range [][2]string{{"UTM 33N", "EPSG:4326 same ground"}, {"Long Island metres", "Long Island US survey feet"}} {
		a, b := totals[pair[0]], totals[pair[1]]
		if relErr(a, b) > 5e-3 {
			t.Errorf("%s: %.6g m², %s: %.6g m²", pair[0], a, pair[1], b)
		}
	}
	// Web Mercator grid area is twice the ground area at 45°N.
	if ratio := 1e6 / totals["Web Mercator 45N"]; math.Abs(ratio-2) > 0.01 {
		t.Errorf("Web Mercator grid area / ground area = %.4f, want 2", ratio)
	}
}

// TestCellAreasCoarseGeographic checks per-pixel areas of coarse geographic
// grids, where cell edges need densifying, the cells of the top row of a
// global grid have a corner at the pole and a grid may cross the
// antimeridian, against the exact formula of the ellipsoid (lonLatBoxArea,
// Snyder 1987). Measured: within 5e-9 (the hand-written equal-area planes
// this replaced: 1.5e-5), so 1e-8.
func TestCellAreasCoarseGeographic(t *testing.T) {
	tests := []struct {
		name string
		g    Grid
	}{
		{"0-60N, 1 degree", testGrid(t, 4326, 10, 60, [6]float64{10, 1, 0, 60, 0, -1})},
		{"global, 2 degrees", testGrid(t, 4326, 180, 90, [6]float64{-180, 2, 0, 90, 0, -2})},
		{"across the antimeridian, 0.5 degrees", testGrid(t, 4326, 4, 4, [6]float64{179, 0.5, 0, 10, 0, -0.5})},
		{"0.05 degrees at 60N", testGrid(t, 4326, 100, 20, [6]float64{0, 0.05, 0, 60, 0, -0.05})},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			a, err := NewCellAreas(tc.g)
			if err != nil {
				t.Fatal(err)
			}
			gt := tc.g.GeoTransform
			for r := range tc.g.Height {
				for c := range tc.g.Width {
					lon, lat := gt[0]+float64(c)*gt[1], gt[3]+float64(r)*gt[5]
					want := lonLatBoxArea(lon, lat+gt[5], lon+gt[1], lat)
					if got := a.At(c, r); relErr(got, want) > 1e-8 {
						t.Fatalf("cell (%d,%d): %.6g m², want %.6g", c, r, got, want)
					}
				}
			}
		})
	}
}

// tmScale is the point scale factor of the transverse Mercator on the
// WGS84 ellipsoid at (lon, lat) in degrees, central meridian lon0 and scale
// k0 on it: Snyder (1987), Map Projections: A Working Manual, p. 61,
//
//	k = k0 [1 + (1 + C) A²/2 + (5 − 4T + 42C + 13C² − 28e'²) A⁴/24
//	       + (61 − 148T + 16T²) A⁶/720],
//
// T = tan² φ, C = e'² cos² φ, A = (λ − λ0) cos φ, e'² = e²/(1 − e²). Its
// next term is of order A⁸, below 1e-10 within 300 km of the meridian.
func tmScale(lon, lat, lon0, k0 float64) float64 {
	f := 1 / wgs84InvF
	e2 := f * (2 - f)
	ep2 := e2 / (1 - e2)
	phi := lat * math.Pi / 180
	T := math.Tan(phi) * math.Tan(phi)
	C := ep2 * math.Cos(phi) * math.Cos(phi)
	A := (lon - lon0) * math.Pi / 180 * math.Cos(phi)
	return k0 * (1 + (1+C)*A*A/2 + (5-4*T+42*C+13*C*C-28*ep2)*math.Pow(A, 4)/24 + (61-148*T+16*T*T)*math.Pow(A, 6)/720)
}

// tmBlockArea is the ground area of the grid rectangle [x0, x1] x [y0, y1]
// of a transverse Mercator, a conformal map whose areas scale by k²: the
// integral of 1/k² over it by 3 x 3-point Gauss–Legendre quadrature (k
// varies smoothly: the rule is exact for polynomials of degree 5), the
// points taken to longitude and latitude by tr (GDAL, independent of the
// geodesic areas under test).
func tmBlockArea(t *testing.T, tr *godal.Transform, x0, y0, x1, y1, lon0, k0 float64) float64 {
	t.Helper()
	nodes, weights := []float64{-math.Sqrt(0.6), 0, math.Sqrt(0.6)}, []float64{5.0 / 9, 8.0 / 9, 5.0 / 9}
	var xs, ys, ws []float64
	for i := range nodes {
		for j := range nodes {
			xs = append(xs, (x0+x1)/2+(x1-x0)/2*nodes[i])
			ys = append(ys, (y0+y1)/2+(y1-y0)/2*nodes[j])
			ws = append(ws, weights[i]*weights[j]/4)
		}
	}
	if err := tr.TransformEx(xs, ys, nil, nil); err != nil {
		t.Fatal(err)
	}
	var mean float64
	for i := range xs {
		k := tmScale(xs[i], ys[i], lon0, k0)
		mean += ws[i] / (k * k)
	}
	return mean * math.Abs((x1-x0)*(y1-y0))
}

// TestCellAreasTransverseMercator checks the areas of every block of
// transverse Mercator grids (UTM, and the demo's projection centred at
// 40°S, 120°W) against the integral of Snyder's scale factor (tmBlockArea):
// an outside truth for projected grids, where the geodesic polygons stand
// for straight grid lines. Measured: within 2e-10 on 30 m pixels, 5e-9 on
// 10 m pixels 300 km from the central meridian (rounding in the geodesic
// areas, whose terms are areas down to the equator); the hand-written
// equal-area planes this replaced were off by up to 6e-9 on 30 m pixels.
func TestCellAreasTransverseMercator(t *testing.T) {
	utm := "+proj=utm +zone=33 +datum=WGS84 +units=m +no_defs"
	demo := "+proj=tmerc +lat_0=-40 +lon_0=-120 +k=1 +x_0=100000 +y_0=100000 +datum=WGS84 +units=m +no_defs"
	tests := []struct {
		name     string
		proj4    string
		lon0, k0 float64
		w, h     int
		gt       [6]float64
		tol      float64
	}{
		{"UTM 33N, 30 m", utm, 15, utmK0, 512, 64, [6]float64{300000, 30, 0, 4500000, 0, -30}, 1e-9},
		{"UTM 33N, 10 m, 300 km west", utm, 15, utmK0, 1098, 64, [6]float64{199980, 10, 0, 5000040, 0, -10}, 1e-8},
		{"demo, 30 m", demo, -120, 1, 683, 64, [6]float64{80000, 30, 0, 120000, 0, -30}, 1e-9},
	}
	for _, tc := range tests {
		tr, wkt := proj4Transform(t, tc.proj4, "+proj=longlat +datum=WGS84 +no_defs")
		g := Grid{Width: tc.w, Height: tc.h, GeoTransform: tc.gt, HasGeoTransform: true, Projection: wkt}
		a, err := NewCellAreas(g)
		if err != nil {
			t.Fatal(err)
		}
		for r := range g.Height {
			for lo := 0; lo < g.Width; lo += a.block {
				hi := min(lo+a.block, g.Width)
				x0, y0 := applyGT(tc.gt, float64(lo), float64(r))
				x1, y1 := applyGT(tc.gt, float64(hi), float64(r+1))
				want := tmBlockArea(t, tr, x0, y0, x1, y1, tc.lon0, tc.k0) / float64(hi-lo)
				if got := a.At(lo, r); relErr(got, want) > tc.tol {
					t.Fatalf("%s: pixel (%d,%d): %.12g m², want %.12g (relative error %.2g > %g)", tc.name, lo, r, got, want, relErr(got, want), tc.tol)
				}
			}
		}
	}
}

func TestCellAreasErrors(t *testing.T) {
	g := testGrid(t, 0, 10, 10, [6]float64{0, 1, 0, 0, 0, -1})
	if _, err := NewCellAreas(g); !errors.Is(err, ErrNoCRS) {
		t.Errorf("no CRS: got %v, want ErrNoCRS", err)
	}
	g = testGrid(t, utm33, 10, 10, [6]float64{})
	g.HasGeoTransform = false
	if _, err := NewCellAreas(g); err == nil || !strings.Contains(err.Error(), "geotransform") {
		t.Errorf("no geotransform: got %v", err)
	}
}

func TestPolygonArea(t *testing.T) {
	square := func(x0, y0, x1, y1 float64) string {
		return fmt.Sprintf("POLYGON ((%[1]v %[2]v,%[3]v %[2]v,%[3]v %[4]v,%[1]v %[4]v,%[1]v %[2]v))", x0, y0, x1, y1)
	}
	// The UTM square of TestCellAreas, with a 100 m square hole.
	holed := "POLYGON ((499500 4599500,500500 4599500,500500 4600500,499500 4600500,499500 4599500)," +
		"(499900 4599900,499900 4600000,500000 4600000,500000 4599900,499900 4599900))"
	tests := []struct {
		name, wkt string
		epsg      int
		want, tol float64
	}{
		{"UTM square", square(499500, 4599500, 500500, 4600500), utm33, 1e6 / (utmK0 * utmK0), 1e-4},
		{"UTM square with a hole", holed, utm33, 0.99e6 / (utmK0 * utmK0), 1e-4},
		{"multipolygon", "MULTIPOLYGON (((499500 4599500,500000 4599500,500000 4600000,499500 4599500)),((500600 4599500,500700 4599500,500700 4599600,500600 4599500)))", utm33, 0.13e6 / (utmK0 * utmK0), 1e-4},
		// Edges of 10° along meridians and parallels: cut into pieces of
		// at most 1 km, the geodesics through them follow the ellipsoid's
		// box (Snyder's closed form) to 5e-9, measured.
		{"10 degree box", square(0, 0, 10, 10), 4326, lonLatBoxArea(0, 0, 10, 10), 1e-8},
		{"1 degree at 60N", square(20, 60, 21, 61), 4326, lonLatBoxArea(20, 60, 21, 61), 1e-8},
		{"across the antimeridian", square(179.5, 10, 180.5, 11), 4326, lonLatBoxArea(179.5, 10, 180.5, 11), 1e-8},
	}
	for _, tc := range tests {
		got, err := PolygonArea(tc.wkt, epsgWKT(t, tc.epsg))
		if err != nil {
			t.Errorf("%s: %v", tc.name, err)
			continue
		}
		if relErr(got, tc.want) > tc.tol {
			t.Errorf("%s: %.7g m², want %.7g", tc.name, got, tc.want)
		}
	}
	if _, err := PolygonArea(square(0, 0, 1, 1), ""); !errors.Is(err, ErrNoCRS) {
		t.Errorf("no CRS: got %v, want ErrNoCRS", err)
	}
	for _, bad := range []string{"POINT (1 2)", "POLYGON ((0 0"} {
		if _, err := PolygonArea(bad, epsgWKT(t, utm33)); err == nil || strings.Contains(err.Error(), "\n") {
			t.Errorf("%s: got %v, want a one-line error", bad, err)
		}
	}
}

// BenchmarkCellAreas: the cell areas of a Sentinel-2 tile's width of 10 m
// pixels in UTM, 1000 rows (a whole 10980-row tile takes 11 times this).
func BenchmarkCellAreas(b *testing.B) {
	wkt, err := EPSG(utm33)
	if err != nil {
		b.Fatal(err)
	}
	g := Grid{Width: 10980, Height: 1000, GeoTransform: [6]float64{199980, 10, 0, 5000040, 0, -10}, HasGeoTransform: true, Projection: wkt}
	for b.Loop() {
		if _, err := NewCellAreas(g); err != nil {
			b.Fatal(err)
		}
	}
}

// TestCellAreasSameAlongRow: where every block of a row is the first
// turned about the polar axis (north-up geographic and Mercator grids),
// measuring the first block alone gives the areas of measuring every
// block (the ellipsoid is symmetric about its axis), with narrower last
// blocks, cells at the pole and rows cut into pieces; grids where it does
// not hold (a rotated geotransform, transverse Mercator) are measured
// block by block either way. What differs is rounding in the
// block-by-block path, which sums its edges' areas down to the equator
// (up to 1e14 m² near a pole) in plain doubles, where the first block is
// measured by geod_polygonarea, which sums exactly: measured 2e-10 of a
// cell on 1e-4 degree pixels at 45N (both within 1.2e-9 of Snyder's closed
// form there), 1.8e-9 within 0.2 degrees of the pole; so 3e-9.
func TestCellAreasSameAlongRow(t *testing.T) {
	tests := []struct {
		name  string
		g     Grid
		alike bool // every row measured by its first block
	}{
		{"10 m of longitude at 45N", testGrid(t, 4326, 1000, 40, [6]float64{10, 1e-4, 0, 45, 0, -1e-4}), true},
		{"0.01 degrees from the pole, a narrower last block", testGrid(t, 4326, 300, 20, [6]float64{0, 0.01, 0, 90, 0, -0.01}), true},
		{"coarse: rows cut into pieces", testGrid(t, 4326, 20, 4, [6]float64{0, 0.5, 0, 60, 0, -0.5}), true},
		{"Web Mercator", testGrid(t, 3857, 300, 30, [6]float64{-1.5e6, 1000, 0, 5.6e6, 0, -1000}), true},
		{"rotated geotransform", testGrid(t, 4326, 300, 10, [6]float64{10, 1e-3, 1e-5, 45, 1e-5, -1e-3}), false},
		{"UTM", testGrid(t, utm33, 300, 10, [6]float64{499500, 10, 0, 4600500, 0, -10}), false},
		{"across the antimeridian", testGrid(t, 4326, 300, 10, [6]float64{179.9, 1e-3, 0, 10, 0, -1e-3}), true},
	}
	for _, tc := range tests {
		fast, err := newCellAreas(tc.g, false)
		if err != nil {
			t.Fatal(err)
		}
		every, err := newCellAreas(tc.g, true)
		if err != nil {
			t.Fatal(err)
		}
		if want := map[bool]int{true: tc.g.Height}[tc.alike]; fast.alike != want || every.alike != 0 {
			t.Errorf("%s: %d rows measured by their first block, want %d", tc.name, fast.alike, want)
		}
		worst := 0.0
		for r := range tc.g.Height {
			for c := 0; c < tc.g.Width; c += fast.block {
				worst = max(worst, relErr(fast.At(c, r), every.At(c, r)))
			}
		}
		if worst > 3e-9 || relErr(fast.Mean(), every.Mean()) > 3e-9 {
			t.Errorf("%s: cell areas differ by up to %.2g of a cell, mean by %.2g", tc.name, worst, relErr(fast.Mean(), every.Mean()))
		}
	}
}

// BenchmarkCellAreasGeographic: the cell areas of a north-up EPSG:4326
// grid as wide as a Sentinel-2 tile, 1e-4 degrees (about 8 x 11 m at 45N),
// 1000 rows, where every block of a row has the first's area.
func BenchmarkCellAreasGeographic(b *testing.B) {
	wkt, err := EPSG(4326)
	if err != nil {
		b.Fatal(err)
	}
	g := Grid{Width: 10980, Height: 1000, GeoTransform: [6]float64{10, 1e-4, 0, 45, 0, -1e-4}, HasGeoTransform: true, Projection: wkt}
	for b.Loop() {
		if _, err := NewCellAreas(g); err != nil {
			b.Fatal(err)
		}
	}
}
