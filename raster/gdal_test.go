package raster

import (
	"errors"
	"testing"
)

// TestTidyMessages: GDAL's, libtiff's and SQLite's own words become one line
// in the user's words (issue 24, item 10). The inputs are the messages these
// libraries print, as seen from GDAL 3.6 on truncated TIFFs and on a
// GeoPackage written to a full tmpfs.
func TestTidyMessages(t *testing.T) {
	tests := []struct {
		name string
		read bool // tidyRead instead of tidy
		in   string
		want string
	}{
		{"sqlite full", false, "sqlite3_exec(COMMIT) failed: database or disk is full", "no space left on device"},
		{"sqlite insert full", false, "sqlite3_exec(INSERT INTO gpkg_geometry_columns (table_name) VALUES ('changes')) failed: database or disk is full", "no space left on device"},
		{"sqlite read-only", false, "sqlite3_exec(CREATE TABLE x (a)) failed: attempt to write a readonly database", "the GeoPackage could not be written: attempt to write a readonly database"},
		{"repeated lines", false, "a\nb\na\n", "a; b"},
		{"unknown cpl error", true, "unknown cpl error 3", "cannot read the data (the file is damaged or truncated)"},
		{"libtiff tile", true, "TIFFFillTile:Read error at row 32, col 0, tile 3; got 1038 bytes, expected 1727\nTIFFReadEncodedTile() failed.\ncut.tif, band 1: IReadBlock failed at X offset 0, Y offset 1: TIFFReadEncodedTile() failed.", "cannot read the data (the file is damaged or truncated)"},
	}
	for _, tc := range tests {
		in := errors.New(tc.in)
		got := tidy(in)
		if tc.read {
			got = tidyRead(in)
		}
		if got.Error() != tc.want || !errors.Is(got, in) {
			t.Errorf("%s: %q, want %q wrapping the original", tc.name, got, tc.want)
		}
	}
}
