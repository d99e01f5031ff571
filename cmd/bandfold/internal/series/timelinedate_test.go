package series_test

import (
	"os"
	"path/filepath"
	"testing"
	"time"

	"bandfold/cmd/bandfold/internal/jobtest"
	"bandfold/raster"
)

// mtlDir holds the Landsat metadata fixtures (testdata/README.md): both
// give DATE_ACQUIRED = 2013-07-07 for the product whose band files they
// list.
const mtlDir = "../../../../testdata/mtl"

// TestDateSources: each scene is written with GDAL (raster.Create) under
// the name given, carrying its date in one source, and the resolver must find
// that date from that source (raster.SceneDate, as the series engine
// dates scenes), in the order of preference: a Landsat MTL beside the
// file, the IMAGERY domain's ACQUISITIONDATETIME, ACQUISITION_DATE, the
// file name, then TIFFTAG_DATETIME (a file's creation time in TIFF 6.0). The dates are known by
// construction (they are what each file is written with); the MTL
// fixtures' DATE_ACQUIRED is 2013-07-07.
func TestDateSources(t *testing.T) {
	// A GeoTIFF keeps no IMAGERY domain, and bandfold's GDAL reads no
	// sidecar (.aux.xml, .IMD) of its own accord
	// (GDAL_DISABLE_READDIR_ON_OPEN=EMPTY_DIR), so the IMAGERY cases are GDAL
	// VRTs over the GeoTIFF, whose XML carries the domain.
	tests := []struct {
		name     string // the file written
		metadata map[string]string
		imagery  string // ACQUISITIONDATETIME of the IMAGERY domain: the scene is a VRT
		mtl      string // the MTL fixture copied beside the file, if any
		want     string
		source   string
	}{
		{"scene-a.tif", map[string]string{"TIFFTAG_DATETIME": "2016:07:01 10:20:30"}, "", "", "2016-07-01", "TIFFTAG_DATETIME"},
		{"scene-b.vrt", nil, "2017-06-28T10:20:30.000Z", "", "2017-06-28", "IMAGERY:ACQUISITIONDATETIME"},
		{"scene-c.tif", map[string]string{"ACQUISITION_DATE": "2018-07-03"}, "", "", "2018-07-03", "ACQUISITION_DATE"},
		{"LC08_L1TP_195025_20130707_20200912_02_T1_B4.TIF", nil, "", "LC08_L1TP_195025_20130707_20200912_02_T1_MTL.txt", "2013-07-07", "MTL:DATE_ACQUIRED"},
		{"LC08_L1TP_195025_20130707_20170503_01_T1_B4.TIF", nil, "", "LC08_L1TP_195025_20130707_20170503_01_T1_MTL.txt", "2013-07-07", "MTL:DATE_ACQUIRED"},
		{"vessel-2023-06-14.tif", nil, "", "", "2023-06-14", "file name"},
		{"S2A_MSIL2A_20190704_T31UFQ.tif", nil, "", "", "2019-07-04", "file name"},
		{"mosaic_2019_summer.tif", nil, "", "", "2019", "file name"},
		// Acquisition metadata wins over the name, the name over the TIFF tag.
		{"x-2020-01-01.tif", map[string]string{"TIFFTAG_DATETIME": "2018:05:05 00:00:00"}, "", "", "2020-01-01", "file name"},
		{"y-2020-01-01.vrt", nil, "2019-01-01T00:00:00Z", "", "2019-01-01", "IMAGERY:ACQUISITIONDATETIME"},
	}
	grid := raster.Grid{Width: 4, Height: 3, GeoTransform: [6]float64{0, 10, 0, 30, 0, -10}, HasGeoTransform: true}
	for i, tc := range tests {
		dir := filepath.Join(t.TempDir(), string(rune('a'+i)))
		if err := os.Mkdir(dir, 0o755); err != nil {
			t.Fatal(err)
		}
		path := filepath.Join(dir, tc.name)
		tif := path
		if tc.imagery != "" {
			tif = filepath.Join(dir, "pixels.tif")
		}
		jobtest.WriteRasterFile(t, tif, raster.Spec{Grid: grid, Bands: 1, DataType: "UInt16", Metadata: tc.metadata}, make([]float64, 12))
		if tc.imagery != "" {
			vrt := `<VRTDataset rasterXSize="4" rasterYSize="3"><Metadata domain="IMAGERY"><MDI key="ACQUISITIONDATETIME">` + tc.imagery +
				`</MDI></Metadata><VRTRasterBand dataType="UInt16" band="1"><SimpleSource><SourceFilename relativeToVRT="1">pixels.tif</SourceFilename>` +
				`<SourceBand>1</SourceBand></SimpleSource></VRTRasterBand></VRTDataset>`
			if err := os.WriteFile(path, []byte(vrt), 0o644); err != nil {
				t.Fatal(err)
			}
		}
		if tc.mtl != "" {
			jobtest.CopyFile(t, filepath.Join(mtlDir, tc.mtl), filepath.Join(dir, tc.mtl))
		}
		d, _, err := raster.SceneDate(path)
		if err != nil {
			t.Errorf("%s: %v", tc.name, err)
			continue
		}
		if d.Label != tc.want || d.Source != tc.source {
			t.Errorf("%s: %s from %s, want %s from %s", tc.name, d.Label, d.Source, tc.want, tc.source)
		}
	}
}

// FuzzDateParser: the parsers never panic, and a date they return reads
// back as itself.
func FuzzDateParser(f *testing.F) {
	for _, s := range []string{"2016-07-01", "2016:07:01 10:20:30", "20160701", "2016", "LC08_20130707_B1.TIF", "a-9999-99-99"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		for _, parse := range []func(string) (raster.Date, bool){raster.ParseDate, raster.DateFromName} {
			d, ok := parse(s)
			if !ok {
				continue
			}
			back, ok := raster.ParseDate(d.Label)
			if !ok || !back.Time.Equal(d.Time) || d.Time.Location() != time.UTC {
				t.Fatalf("%q: date %v (%q) does not read back", s, d.Time, d.Label)
			}
		}
	})
}
