package raster

import (
	"errors"
	"fmt"
	"maps"
	"slices"
	"strings"

	"github.com/airbusgeo/godal"

	"bandfold/raster/output"
)

// SurveyLayer is the name of the point layer of a survey GeoPackage.
const SurveyLayer = "survey"

// Point is one sample unit of a survey: its stratum and map class (as
// names), its pixel centre in the map's CRS (X, Y) and in WGS 84 (Lon,
// Lat; 0 without a CRS), its weight (stratum area / stratum sample size)
// and the interpreter's reference label ("" until labelled).
type Point struct {
	ID                int
	Stratum, MapClass string
	X, Y, Lon, Lat    float64
	Weight            float64
	Reference         string
}

// Points is a survey's point layer: the points, the CRS (WKT, "" for none)
// and the layer metadata (strata areas, design, map fingerprint).
type Points struct {
	CRS      string
	Points   []Point
	Metadata map[string]string
}

// ErrNoReference: a survey layer lacks the reference field.
var ErrNoReference = errors.New("has no reference field")

var pointFields = []struct {
	name string
	typ  godal.FieldType
}{
	{"id", godal.FTInt}, {"stratum", godal.FTString}, {"map_class", godal.FTString}, {"x", godal.FTReal}, {"y", godal.FTReal},
	{"lon", godal.FTReal}, {"lat", godal.FTReal}, {"weight", godal.FTReal}, {"reference", godal.FTString},
}

// PixelCentres returns the georeferenced centres of the pixels at the given
// indices (row by row) of g, and their longitude and latitude on WGS 84
// through a GDAL coordinate transformation (zeros without a CRS).
func PixelCentres(g Grid, pixels []int) (xs, ys, lons, lats []float64, err error) {
	n := len(pixels)
	xs, ys, lons, lats = make([]float64, n), make([]float64, n), make([]float64, n), make([]float64, n)
	for i, p := range pixels {
		col, row := float64(p%g.Width)+0.5, float64(p/g.Width)+0.5
		if g.HasGeoTransform {
			xs[i], ys[i] = applyGT(g.GeoTransform, col, row)
		} else {
			xs[i], ys[i] = col, row
		}
	}
	if g.Projection == "" || n == 0 {
		return xs, ys, lons, lats, nil
	}
	copy(lons, xs)
	copy(lats, ys)
	if _, err := toWGS84(g.Projection, lons, lats); err != nil {
		return nil, nil, nil, nil, err
	}
	return xs, ys, lons, lats, nil
}

// WritePoints writes the survey's point layer to a new GeoPackage at path
// through output.File (temporary name, renamed into place by Commit).
func WritePoints(path string, pts *Points, overwrite bool) error {
	f, err := CreatePoints(path, pts, overwrite)
	if err != nil {
		return err
	}
	defer f.Abort()
	return f.Commit()
}

// CreatePoints writes the survey's point layer to the temporary file of a
// new GeoPackage at path and returns it uncommitted: the caller commits it
// when its other outputs are written too, or aborts it.
func CreatePoints(path string, pts *Points, overwrite bool) (_ *output.File, err error) {
	f, err := output.Create(path, overwrite, ".gpkg")
	if err != nil {
		return nil, err
	}
	f.Sidecars("-journal", "-wal", "-shm")
	defer func() {
		if err != nil {
			f.Abort()
		}
	}()
	ds, err := godal.CreateVector(godal.GeoPackage, f.Temp(), errLogger)
	if err != nil {
		return nil, fmt.Errorf("create %s: %w", path, tidy(err))
	}
	if err := writeLayer(ds, pts); err != nil {
		ds.Close(errLogger)
		return nil, fmt.Errorf("write %s: %w", path, tidy(err))
	}
	if err := ds.Close(errLogger); err != nil {
		return nil, fmt.Errorf("write %s: %w", path, tidy(err))
	}
	return f, nil
}

func writeLayer(ds *godal.Dataset, pts *Points) error {
	var sr *godal.SpatialRef
	if pts.CRS != "" {
		var err error
		if sr, err = godal.NewSpatialRefFromWKT(pts.CRS, errLogger); err != nil {
			return fmt.Errorf("read CRS: %w", err)
		}
		defer sr.Close()
	}
	var opts []godal.CreateLayerOption
	for _, f := range pointFields {
		opts = append(opts, godal.NewFieldDefinition(f.name, f.typ))
	}
	layer, err := ds.CreateLayer(SurveyLayer, sr, godal.GTPoint, append(opts, errLogger)...)
	if err != nil {
		return err
	}
	for _, k := range slices.Sorted(maps.Keys(pts.Metadata)) {
		if !strings.HasPrefix(k, "BANDFOLD_") {
			continue // the driver's own items (DESCRIPTION, IDENTIFIER)
		}
		if err := layer.SetMetadata(k, pts.Metadata[k], errLogger); err != nil {
			return err
		}
	}
	if err := ds.StartTransaction(errLogger); err != nil {
		return err
	}
	for _, p := range pts.Points {
		if err := addPoint(layer, sr, p); err != nil {
			return err
		}
	}
	return ds.CommitTransaction(errLogger)
}

func addPoint(layer godal.Layer, sr *godal.SpatialRef, p Point) error {
	geom, err := godal.NewGeometryFromWKT(fmt.Sprintf("POINT (%.17g %.17g)", p.X, p.Y), sr, errLogger)
	if err != nil {
		return err
	}
	defer geom.Close()
	f, err := layer.NewFeature(geom, errLogger)
	if err != nil {
		return err
	}
	defer f.Close()
	fields := f.Fields()
	vals := []any{p.ID, p.Stratum, p.MapClass, p.X, p.Y, p.Lon, p.Lat, p.Weight}
	for i, v := range vals {
		if err := f.SetFieldValue(fields[pointFields[i].name], v, errLogger); err != nil {
			return err
		}
	}
	// Every field is set on every feature, the reference too (empty until
	// labelled): GDAL's GeoPackage driver reuses its UPDATE statement only
	// for features that set the same fields.
	if err := f.SetFieldValue(fields["reference"], p.Reference, errLogger); err != nil {
		return err
	}
	if err := layer.UpdateFeature(f, errLogger); err != nil {
		return fmt.Errorf("point %d: %w", p.ID, err)
	}
	return nil
}

// ReadPoints reads the survey layer of the GeoPackage at path (the layer
// named SurveyLayer, or the only layer): the fields, the CRS and the layer
// metadata. A layer without the reference field is an error wrapping
// ErrNoReference.
func ReadPoints(path string) (*Points, error) {
	ds, err := godal.Open(path, godal.VectorOnly(), errLogger)
	if err != nil {
		return nil, fmt.Errorf("survey %s: %w", path, tidy(err))
	}
	defer ds.Close(errLogger)
	layers := ds.Layers()
	var layer *godal.Layer
	if l := ds.LayerByName(SurveyLayer); l != nil {
		layer = l
	} else if len(layers) == 1 {
		layer = &layers[0]
	} else {
		return nil, fmt.Errorf("survey %s has no layer %q", path, SurveyLayer)
	}
	pts := &Points{Metadata: layer.Metadatas(errLogger)}
	if sr := layer.SpatialRef(); sr != nil {
		pts.CRS, _ = sr.WKT(errLogger)
		sr.Close()
	}
	layer.ResetReading()
	for f := layer.NextFeature(); f != nil; f = layer.NextFeature() {
		p, err := readPoint(f)
		f.Close()
		if err != nil {
			return nil, fmt.Errorf("survey %s: %w", path, err)
		}
		pts.Points = append(pts.Points, p)
	}
	return pts, nil
}

func readPoint(f *godal.Feature) (Point, error) {
	fields := f.Fields()
	for _, pf := range pointFields {
		if _, ok := fields[pf.name]; !ok {
			if pf.name == "reference" {
				return Point{}, ErrNoReference
			}
			return Point{}, fmt.Errorf("has no %s field", pf.name)
		}
	}
	ref := fields["reference"]
	p := Point{ID: int(fields["id"].Int()), Stratum: fields["stratum"].String(), MapClass: fields["map_class"].String(),
		X: fields["x"].Float(), Y: fields["y"].Float(), Lon: fields["lon"].Float(), Lat: fields["lat"].Float(), Weight: fields["weight"].Float()}
	if ref.IsSet() {
		p.Reference = ref.String()
	}
	return p, nil
}
