package raster

import (
	"fmt"
	"math"
	"strings"

	"github.com/airbusgeo/godal"
)

func gridOf(ds *godal.Dataset) Grid {
	st := ds.Structure()
	g := Grid{Width: st.SizeX, Height: st.SizeY, Projection: ds.Projection()}
	if gt, err := ds.GeoTransform(errLogger); err == nil {
		g.GeoTransform, g.HasGeoTransform = gt, true
	}
	return g
}

// Compare returns nil when g and o are the same grid: same size, geotransforms
// equal to 1e-9 relative (of the pixel size for the offsets and rotation
// terms), and the same CRS by GDAL's comparison. Otherwise the error says
// what differs and wraps ErrGridMismatch.
func (g Grid) Compare(o Grid) error {
	if g.Width != o.Width || g.Height != o.Height {
		return fmt.Errorf("size %dx%d against %dx%d: %w", o.Width, o.Height, g.Width, g.Height, ErrGridMismatch)
	}
	if g.HasGeoTransform != o.HasGeoTransform {
		return fmt.Errorf("one has a geotransform, the other none: %w", ErrGridMismatch)
	}
	if g.HasGeoTransform {
		scale := max(math.Abs(g.GeoTransform[1]), math.Abs(g.GeoTransform[5]), math.Abs(g.GeoTransform[2]), math.Abs(g.GeoTransform[4]))
		for i := range 6 {
			a, b := g.GeoTransform[i], o.GeoTransform[i]
			tol := 1e-9 * max(math.Abs(a), math.Abs(b), scale)
			if math.Abs(a-b) > tol {
				return fmt.Errorf("geotransform %v against %v: %w", o.GeoTransform, g.GeoTransform, ErrGridMismatch)
			}
		}
	}
	same, err := sameCRS(g.Projection, o.Projection)
	if err != nil {
		return err
	}
	if !same {
		return fmt.Errorf("CRS %s against %s: %w", crsName(o.Projection), crsName(g.Projection), ErrGridMismatch)
	}
	return nil
}

func sameCRS(a, b string) (bool, error) {
	if a == "" || b == "" {
		return a == b, nil
	}
	if a == b {
		return true, nil
	}
	sa, err := godal.NewSpatialRefFromWKT(a, errLogger)
	if err != nil {
		return false, fmt.Errorf("read CRS: %w", err)
	}
	defer sa.Close()
	sb, err := godal.NewSpatialRefFromWKT(b, errLogger)
	if err != nil {
		return false, fmt.Errorf("read CRS: %w", err)
	}
	defer sb.Close()
	return sa.IsSame(sb), nil
}

// crsName gives a short name for a WKT CRS for error messages.
func crsName(wkt string) string {
	if wkt == "" {
		return "(none)"
	}
	if _, rest, ok := strings.Cut(wkt, `"`); ok {
		if name, _, ok := strings.Cut(rest, `"`); ok {
			return fmt.Sprintf("%q", name)
		}
	}
	return "(unnamed)"
}

// String describes the grid for messages: size, pixel size and CRS
// ("40x30 pixels of 30 x 30, CRS "WGS 84 / UTM zone 33N"").
func (g Grid) String() string {
	size := fmt.Sprintf("%dx%d pixels", g.Width, g.Height)
	if g.HasGeoTransform {
		size += fmt.Sprintf(" of %.6g x %.6g", g.GeoTransform[1], math.Abs(g.GeoTransform[5]))
	} else {
		size += ", no geotransform"
	}
	return size + ", CRS " + crsName(g.Projection)
}

// offGrid is the error for a file not on the stack's grid: it names the
// file and both grids, and says how to warp it.
func offGrid(what, path string, g Grid, first string, target Grid, err error) error {
	return fmt.Errorf("%s%s (%v) is not on the grid of %s (%v): %w; pass --align to warp it onto that grid",
		what, path, g, first, target, err)
}
