package jobkit

import (
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"time"

	"bandfold/raster"
	"bandfold/raster/output"
)

// A STAC Item beside every output set, so that catalogues and GIS tools
// find the outputs with their place, dates and bands: STAC 1.0.0 (the
// SpatioTemporal Asset Catalog specification, Item), with the eo,
// projection and raster extensions where they apply.

// STAC extension schemas the items declare.
const (
	stacEO         = "https://stac-extensions.github.io/eo/v1.1.0/schema.json"
	stacProjection = "https://stac-extensions.github.io/projection/v1.1.0/schema.json"
	stacRaster     = "https://stac-extensions.github.io/raster/v1.1.0/schema.json"
)

// Media types of the assets, by file extension (STAC best practices,
// "Common Media Types in STAC").
var stacMediaTypes = map[string]string{
	".tif": "image/tiff; application=geotiff", ".gpkg": "application/geopackage+sqlite3", ".png": "image/png",
	".json": "application/json", ".html": "text/html", ".csv": "text/csv", ".xml": "application/xml",
}

// ItemSpec is what an output set's STAC Item says.
type ItemSpec struct {
	// ID names the item; Grid places it (no geometry without a CRS).
	ID   string
	Grid raster.Grid
	// Start and End are the acquisition dates the outputs cover (the
	// same for one date); zero when unknown, when the item is dated by
	// Created.
	Start, End time.Time
	Created    time.Time
	// Description is the item's description: what it is, and for change
	// outputs the caution.
	Description string
	// Assets are the output files (base names, in the item's folder).
	Assets []ItemAsset
	// COG marks the GeoTIFF assets as cloud-optimised.
	COG bool
}

// ItemAsset is one output file of an item.
type ItemAsset struct {
	Key, File, Title string
	// Roles are the STAC roles: "data", "overview", "metadata".
	Roles []string
	// Bands describe a raster asset's bands (nil for other files).
	Bands []ItemBand
}

// ItemBand is one band of a raster asset.
type ItemBand struct {
	Name, Description string
	// CentreUM and FWHMUM are the band's wavelength and width in
	// micrometres (0 when not a spectral band).
	CentreUM, FWHMUM float64
	DataType         string
	NoData           *float64
}

// WriteItem writes spec as a STAC Item to path (through the output
// lifecycle: the caller's folder, or a file of its own).
func WriteItem(path string, spec ItemSpec, overwrite bool) error {
	item, err := stacItem(spec)
	if err != nil {
		return fmt.Errorf("STAC item %s: %w", path, err)
	}
	data, err := json.MarshalIndent(item, "", "  ")
	if err != nil {
		return fmt.Errorf("STAC item %s: %w", path, err)
	}
	return output.WriteFile(path, append(data, '\n'), overwrite)
}

// stacItem builds the Item as JSON-ready maps, in the spec's field names.
func stacItem(spec ItemSpec) (map[string]any, error) {
	props := map[string]any{"description": spec.Description, "created": spec.Created.UTC().Format(time.RFC3339)}
	switch {
	case spec.Start.IsZero():
		props["datetime"] = spec.Created.UTC().Format(time.RFC3339)
	case spec.End.Equal(spec.Start):
		props["datetime"] = stacDay(spec.Start)
	default:
		props["datetime"], props["start_datetime"], props["end_datetime"] = nil, stacDay(spec.Start), stacDay(spec.End)
	}
	item := map[string]any{"type": "Feature", "stac_version": "1.0.0", "id": spec.ID,
		"stac_extensions": []string{stacEO, stacProjection, stacRaster}, "properties": props, "links": []any{}, "geometry": nil}
	if fp, err := raster.GridFootprint(spec.Grid); err == nil {
		item["geometry"] = map[string]any{"type": "Polygon", "coordinates": [][][2]float64{fp.Ring}}
		item["bbox"] = fp.BBox[:]
		if fp.EPSG != 0 {
			props["proj:epsg"] = fp.EPSG
		} else {
			props["proj:epsg"], props["proj:wkt2"] = nil, spec.Grid.Projection
		}
		gt := spec.Grid.GeoTransform
		props["proj:shape"] = []int{spec.Grid.Height, spec.Grid.Width}
		props["proj:transform"] = []float64{gt[1], gt[2], gt[0], gt[4], gt[5], gt[3]}
	}
	assets := map[string]any{}
	for _, a := range spec.Assets {
		assets[a.Key] = stacAsset(a, spec)
	}
	item["assets"] = assets
	return item, nil
}

// stacAsset is one asset of an item.
func stacAsset(a ItemAsset, spec ItemSpec) map[string]any {
	media := stacMediaTypes[strings.ToLower(filepath.Ext(a.File))]
	if spec.COG && strings.HasPrefix(media, "image/tiff") {
		media += "; profile=cloud-optimized"
	}
	out := map[string]any{"href": "./" + a.File, "title": a.Title, "roles": a.Roles}
	if media != "" {
		out["type"] = media
	}
	if len(a.Bands) == 0 {
		return out
	}
	var eo, rb []map[string]any
	spectral := false
	for _, b := range a.Bands {
		e := map[string]any{"name": b.Name, "description": b.Description}
		if b.CentreUM > 0 {
			spectral = true
			e["center_wavelength"] = b.CentreUM
			if b.FWHMUM > 0 {
				e["full_width_half_max"] = b.FWHMUM
			}
		}
		eo = append(eo, e)
		r := map[string]any{"data_type": stacDataType(b.DataType)}
		if b.NoData != nil && *b.NoData == *b.NoData {
			r["nodata"] = *b.NoData
		}
		if spec.Grid.HasGeoTransform {
			r["spatial_resolution"] = spec.Grid.GeoTransform[1]
		}
		rb = append(rb, r)
	}
	if spectral || len(eo) > 0 {
		out["eo:bands"] = eo
	}
	out["raster:bands"] = rb
	return out
}

// stacDay writes a date as the RFC 3339 time STAC wants, at midnight UTC.
func stacDay(t time.Time) string {
	return time.Date(t.Year(), t.Month(), t.Day(), 0, 0, 0, 0, time.UTC).Format(time.RFC3339)
}

// FolderAssets describes the files of an output folder as assets: rasters
// as data (their bands read from the files), PNG figures as overviews, JSON
// and HTML as metadata.
func FolderAssets(dir string, files []string) ([]ItemAsset, error) {
	var out []ItemAsset
	for _, f := range files {
		a := ItemAsset{Key: f, File: f, Title: f}
		switch strings.ToLower(filepath.Ext(f)) {
		case ".tif":
			a.Roles = []string{"data"}
			bands, err := RasterBands(filepath.Join(dir, f))
			if err != nil {
				return nil, err
			}
			a.Bands = bands
			if _, ok := raster.AuxSidecar(filepath.Join(dir, f)); ok {
				aux := f + ".aux.xml"
				// GDAL's sidecar: the class names and colours of f.
				out = append(out, ItemAsset{Key: aux, File: aux, Title: "class names and colours of " + f + " (GDAL's auxiliary metadata)", Roles: []string{"metadata"}})
			}
		case ".gpkg", ".csv":
			a.Roles = []string{"data"}
		case ".png":
			a.Roles = []string{"overview"}
		default:
			a.Roles = []string{"metadata"}
		}
		out = append(out, a)
	}
	return out, nil
}

// RasterBands describes the bands of a raster file for its asset.
func RasterBands(path string) ([]ItemBand, error) {
	bands, _, err := rasterBandsAndGrid(path)
	return bands, err
}

// rasterBandsAndGrid describes the bands of a raster file for its asset,
// and returns its grid, from one opening.
func rasterBandsAndGrid(path string) ([]ItemBand, raster.Grid, error) {
	s, err := raster.Open([]string{path})
	if err != nil {
		return nil, raster.Grid{}, err
	}
	defer s.Close()
	out := make([]ItemBand, s.Len())
	for i, b := range s.Bands {
		out[i] = ItemBand{Name: b.Name, Description: b.Name, DataType: b.DataType, NoData: b.NoData,
			CentreUM: b.WavelengthNM / 1000, FWHMUM: b.FWHMNM / 1000}
	}
	return out, s.Grid, nil
}

// stacDataType is the raster extension's name of a GDAL data type.
func stacDataType(gdal string) string {
	if gdal == "Byte" {
		return "uint8"
	}
	return strings.ToLower(gdal)
}

// FolderItem writes item.json, the STAC Item of an output folder being
// written (dir): its files as assets (item.json among them), its grid, the
// dates it covers and its description.
func FolderItem(dir *output.Folder, files []string, grid raster.Grid, start, end time.Time, description string) error {
	assets, err := FolderAssets(filepath.Dir(dir.Path("item.json")), files)
	if err != nil {
		return err
	}
	assets = append(assets, ItemAsset{Key: "item.json", File: "item.json", Title: "this STAC Item", Roles: []string{"metadata"}})
	if start.IsZero() || end.IsZero() {
		start, end = time.Time{}, time.Time{}
	}
	spec := ItemSpec{ID: filepath.Base(dir.Final()), Grid: grid, Start: start, End: end, Created: time.Now(),
		Description: description, Assets: assets}
	return WriteItem(dir.Path("item.json"), spec, false)
}

// ItemPath is the STAC Item beside a raster output: "scene.components.tif"
// gets "scene.components.item.json".
func ItemPath(rasterPath string) string {
	return strings.TrimSuffix(rasterPath, filepath.Ext(rasterPath)) + ".item.json"
}

// RasterItem writes, under a temporary name, the STAC Item of a raster
// output being written: the raster (read at temp, named as final) as its
// one data asset, dated by the scene it was made from (sceneFile; the time
// of writing when it has no date). The caller commits the returned file
// after the raster, or aborts it.
func RasterItem(temp, final, sceneFile, description string, cog, overwrite bool) (*output.File, error) {
	bands, grid, err := rasterBandsAndGrid(temp)
	if err != nil {
		return nil, err
	}
	spec := ItemSpec{ID: strings.TrimSuffix(filepath.Base(final), filepath.Ext(final)), Grid: grid, Created: time.Now(),
		Description: description, COG: cog, Assets: []ItemAsset{{Key: "data", File: filepath.Base(final), Title: filepath.Base(final),
			Roles: []string{"data"}, Bands: bands}}}
	if d, _, err := raster.SceneDate(sceneFile); err == nil {
		spec.Start, spec.End = d.Time, d.Time
	}
	item, err := stacItem(spec)
	if err != nil {
		return nil, err
	}
	data, err := json.MarshalIndent(item, "", "  ")
	if err != nil {
		return nil, err
	}
	path := ItemPath(final)
	f, err := output.Create(path, overwrite, "")
	if err != nil {
		return nil, err
	}
	if err := os.WriteFile(f.Temp(), append(data, '\n'), 0o666); err != nil {
		f.Abort()
		return nil, fmt.Errorf("write %s: %w", path, err)
	}
	return f, nil
}

// CommitWithItem moves a finished raster and its STAC Item (RasterItem)
// into place together: if the Item cannot be, the raster is removed again.
func CommitWithItem(dst *raster.Output, item *output.File) error {
	if err := dst.Commit(); err != nil {
		return err
	}
	if err := item.Commit(); err != nil {
		os.Remove(dst.Path())
		return err
	}
	return nil
}

// RasterOutputs are the files a raster output at path makes: the raster
// and its STAC Item.
func RasterOutputs(path string) []output.Path {
	return []output.Path{{Role: "output", Path: path}, {Role: "STAC item", Path: ItemPath(path)}}
}

// CheckOutputs refuses, before any work, an output that is one of the
// inputs (output.Distinct) or that exists without overwrite (output.Check).
func CheckOutputs(ins, outs []output.Path, overwrite bool) error {
	if err := output.Distinct(ins, outs); err != nil {
		return err
	}
	for _, out := range outs {
		if err := output.Check(out.Path, overwrite); err != nil {
			return err
		}
	}
	return nil
}
