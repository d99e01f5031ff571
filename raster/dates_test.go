package raster

import (
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"bandfold/tiles"
)

// TestParseDate: each form of date in metadata values, --dates items and
// file names (known by construction: the strings are written to carry
// these dates).
func TestParseDate(t *testing.T) {
	values := []struct{ in, want string }{
		{"2016-07-01", "2016-07-01"},               // ACQUISITION_DATE, DATE_ACQUIRED, --dates
		{"2016:07:01 10:20:30", "2016-07-01"},      // TIFFTAG_DATETIME
		{"2016-07-01T10:20:30.000Z", "2016-07-01"}, // ACQUISITIONDATETIME (IMAGERY)
		{"20160701", "2016-07-01"},                 // --dates
		{"2016", "2016"},                           // a year
		{"2016-02-30", ""}, {"", ""}, {"soon", ""}, {"1850", ""},
	}
	for _, tc := range values {
		d, ok := ParseDate(tc.in)
		if got := map[bool]string{true: d.Label}[ok]; got != tc.want {
			t.Errorf("ParseDate(%q) = %q, want %q", tc.in, got, tc.want)
		}
	}
	names := []struct{ in, want string }{
		{"scenes/vessel-2023-06-14.tif", "2023-06-14"},
		{"LC08_L1TP_195025_20130707_20170503_01_T1_B4.TIF", "2013-07-07"},
		{"/data/mosaic_2019_summer.tif", "2019"},
		{"s1.tif", ""}, {"tile_123456789.tif", ""}, {"x-2023-13-01.tif", "2023"},
	}
	for _, tc := range names {
		d, ok := DateFromName(tc.in)
		if got := map[bool]string{true: d.Label}[ok]; got != tc.want {
			t.Errorf("DateFromName(%q) = %q, want %q", tc.in, got, tc.want)
		}
	}
}

// TestSceneDateOrder: the acquisition metadata wins over the file name,
// which wins over TIFFTAG_DATETIME (the file's creation time in TIFF 6.0),
// and every other source that disagrees is named. The real Landsat files
// date from their MTL's DATE_ACQUIRED (2001-07-30 and 2013-07-07, the dates
// in the products' names and MTLs); the written files' dates are known by
// construction.
func TestSceneDateOrder(t *testing.T) {
	l7 := landsatFiles(t, l7Product, "3")[0]
	l8 := landsatFiles(t, l8Product, "5")[0]
	dir := t.TempDir()
	write := func(name string, md map[string]string) string {
		p := filepath.Join(dir, name)
		o, err := Create(p, Spec{Grid: Grid{Width: 2, Height: 2, GeoTransform: [6]float64{0, 1, 0, 2, 0, -1}}, Bands: 1, DataType: "Byte", Metadata: md})
		if err != nil {
			t.Fatal(err)
		}
		if err := o.Write(tiles.Tile{W: 2, H: 2}, make([]float64, 4)); err != nil {
			t.Fatal(err)
		}
		if err := o.Commit(); err != nil {
			t.Fatal(err)
		}
		return p
	}
	both := write("scene.tif", map[string]string{"ACQUISITION_DATE": "2019-06-15", "TIFFTAG_DATETIME": "2019:01:10 08:00:00"})
	named := write("scene-2018-05-01.tif", map[string]string{"TIFFTAG_DATETIME": "2019:01:10 08:00:00"})
	tagOnly := write("scene-x.tif", map[string]string{"TIFFTAG_DATETIME": "2019:01:10 08:00:00"})
	for _, tc := range []struct {
		path, want, source string
		disagree           []string
	}{
		{l7, "2001-07-30", "MTL:DATE_ACQUIRED", nil},
		{l8, "2013-07-07", "MTL:DATE_ACQUIRED", nil},
		{both, "2019-06-15", "ACQUISITION_DATE", []string{"TIFFTAG_DATETIME says 2019-01-10"}},
		{named, "2018-05-01", "file name", []string{"TIFFTAG_DATETIME says 2019-01-10"}},
		{tagOnly, "2019-01-10", "TIFFTAG_DATETIME", nil},
	} {
		d, disagree, err := SceneDate(tc.path)
		if err != nil {
			t.Fatal(err)
		}
		if d.Label != tc.want || d.Source != tc.source || !slices.Equal(disagree, tc.disagree) {
			t.Errorf("%s: %s from %s (disagreeing %q), want %s from %s (%q)", filepath.Base(tc.path), d.Label, d.Source, disagree, tc.want, tc.source, tc.disagree)
		}
	}
	if _, _, err := SceneDate(write("plain.tif", nil)); err == nil || !strings.Contains(err.Error(), "plain.tif") {
		t.Errorf("undated scene: %v", err)
	}
}
