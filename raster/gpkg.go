package raster

import (
	"fmt"
	"slices"
	"time"

	"github.com/airbusgeo/godal"

	"bandfold/raster/output"
)

// patchFile is a GeoPackage of patches being written under a temporary
// name.
type patchFile struct {
	file  *output.File
	ds    *godal.Dataset
	layer godal.Layer
	// fields are the Date fields of the layer, dates the values of the
	// map being written, one per field of writePatches (zero: null).
	fields []string
	dates  []Date
}

var patchFields = []struct {
	name string
	typ  godal.FieldType
}{
	{"area_m2", godal.FTReal}, {"area_ha", godal.FTReal}, {"z_mean", godal.FTReal}, {"z_max", godal.FTReal}, {"top_component", godal.FTInt},
}

func newPatchFile(path, crs string, o PatchOptions, dateFields []string) (*patchFile, error) {
	f, err := output.Create(path, o.Overwrite, ".gpkg")
	if err != nil {
		return nil, err
	}
	f.Sidecars("-journal", "-wal", "-shm")
	p := &patchFile{file: f, fields: dateFields}
	if p.ds, err = godal.CreateVector(godal.GeoPackage, f.Temp(), errLogger); err != nil {
		f.Abort()
		return nil, fmt.Errorf("create %s: %w", path, tidy(err))
	}
	var sr *godal.SpatialRef
	if crs != "" {
		if sr, err = godal.NewSpatialRefFromWKT(crs, errLogger); err != nil {
			p.discard()
			return nil, fmt.Errorf("create %s: read CRS: %w", path, err)
		}
		defer sr.Close()
	}
	var opts []godal.CreateLayerOption
	for _, f := range patchFields {
		opts = append(opts, godal.NewFieldDefinition(f.name, f.typ))
	}
	for _, name := range dateFields {
		opts = append(opts, godal.NewFieldDefinition(name, godal.FTDate))
	}
	opts = append(opts, errLogger)
	if p.layer, err = p.ds.CreateLayer("changes", sr, godal.GTPolygon, opts...); err == nil {
		keys := make([]string, 0, len(o.Metadata))
		for k := range o.Metadata {
			keys = append(keys, k)
		}
		slices.Sort(keys)
		for _, k := range keys {
			if err == nil {
				err = p.layer.SetMetadata(k, o.Metadata[k], errLogger)
			}
		}
	}
	if err == nil {
		err = p.ds.StartTransaction(errLogger)
	}
	if err != nil {
		p.discard()
		return nil, fmt.Errorf("create %s: %w", path, tidy(err))
	}
	return p, nil
}

// add writes one patch and returns its ground area (0 without ea).
func (p *patchFile) add(geom *godal.Geometry, zs *patchStats, ea *geodesy) (float64, error) {
	z, err := zs.of(geom)
	if err != nil {
		return 0, err
	}
	var area float64
	if ea != nil {
		wkb, err := geom.WKB(errLogger)
		if err != nil {
			return 0, err
		}
		g, err := godal.NewGeometryFromWKB(wkb, nil, errLogger)
		if err != nil {
			return 0, err
		}
		area, err = ea.area(g)
		g.Close()
		if err != nil {
			return 0, fmt.Errorf("patch area: %w", err)
		}
	}
	f, err := p.layer.NewFeature(geom, errLogger)
	if err != nil {
		return 0, err
	}
	defer f.Close()
	fields := f.Fields()
	set := func(name string, v any) {
		if err == nil {
			err = f.SetFieldValue(fields[name], v, errLogger)
		}
	}
	if ea != nil {
		set("area_m2", area)
		set("area_ha", area/1e4)
	}
	if z.n > 0 {
		set("z_mean", z.sum/float64(z.n))
		set("z_max", z.max)
	}
	if z.top > 0 {
		set("top_component", z.top)
	}
	for i, name := range p.fields {
		if d := p.dates[i].Time; !d.IsZero() {
			set(name, time.Date(d.Year(), d.Month(), d.Day(), 0, 0, 0, 0, time.UTC))
		}
	}
	if err == nil {
		err = p.layer.UpdateFeature(f, errLogger)
	}
	return area, err
}

// commit closes the GeoPackage and renames it into place.
func (p *patchFile) commit() error {
	err := p.ds.CommitTransaction(errLogger)
	if cerr := p.ds.Close(errLogger); err == nil {
		err = cerr
	}
	p.ds = nil
	if err != nil {
		p.discard()
		return fmt.Errorf("write %s: %w", p.file.Path(), tidy(err))
	}
	return p.file.Commit()
}

// discard closes the GeoPackage, if open, and removes it. It does nothing
// after commit.
func (p *patchFile) discard() {
	if p.ds != nil {
		p.ds.Close(errLogger)
		p.ds = nil
	}
	p.file.Abort()
}
