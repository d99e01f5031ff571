package raster

import (
	"fmt"
	"path/filepath"
	"slices"
	"testing"

	"bandfold/tiles"
)

// bandRoles returns each band's colour interpretation as GDAL's own
// gdalinfo -json reports it.
func bandRoles(t *testing.T, path string) []string {
	t.Helper()
	var out []string
	for _, b := range gdalinfo(t, path)["bands"].([]any) {
		out = append(out, fmt.Sprint(b.(map[string]any)["colorInterpretation"]))
	}
	return out
}

// writeZeros writes a small raster of spec filled with zeros.
func writeZeros(t *testing.T, path string, spec Spec) {
	t.Helper()
	o, err := Create(path, spec)
	if err != nil {
		t.Fatal(err)
	}
	defer o.Abort()
	tl := tiles.Tile{W: spec.Width, H: spec.Height}
	if err := o.Write(tl, make([]float64, tl.Pixels()*spec.Bands)); err != nil {
		t.Fatal(err)
	}
	if err := o.Commit(); err != nil {
		t.Fatal(err)
	}
}

// TestBandRoles (issue 26): every output of more than one band is written
// PHOTOMETRIC=MINISBLACK, so that GDAL's gdalinfo reads band 1 as Gray and
// the others as Undefined (TIFF 6.0: PhotometricInterpretation 1 with
// unspecified extra samples), also the 3 and 4 Byte bands GDAL would
// otherwise call Red/Green/Blue/Alpha and a 3-band Int8 fold; only a
// quicklook meant as colour (Spec.Colour) is RGB. Expected roles: GDAL's
// own output, in GeoTIFF and after the COG driver's copy.
func TestBandRoles(t *testing.T) {
	gray := func(n int) []string {
		return append([]string{"Gray"}, slices.Repeat([]string{"Undefined"}, n-1)...)
	}
	tests := []struct {
		name   string
		dtype  string
		bands  int
		colour bool
		want   []string
	}{
		{"one Byte band", "Byte", 1, false, []string{"Gray"}},
		{"steps of 3 Byte bands", "Byte", 3, false, gray(3)},
		{"steps of 4 Byte bands", "Byte", 4, false, gray(4)},
		{"3-band Int8 fold", SignedByte, 3, false, gray(3)},
		{"4 UInt16 bands", "UInt16", 4, false, gray(4)},
		{"2 Float32 statistics", "Float32", 2, false, gray(2)},
		{"colour quicklook", "Byte", 3, true, []string{"Red", "Green", "Blue"}},
		{"colour quicklook with alpha", "Byte", 4, true, []string{"Red", "Green", "Blue", "Alpha"}},
	}
	dir := t.TempDir()
	for _, tc := range tests {
		for _, format := range []Format{GTiff, COG} {
			path := filepath.Join(dir, fmt.Sprintf("%s-%s.tif", tc.name, format))
			writeZeros(t, path, Spec{Grid: Grid{Width: 8, Height: 5}, Bands: tc.bands, DataType: tc.dtype, Colour: tc.colour, Format: format})
			if got := bandRoles(t, path); !slices.Equal(got, tc.want) {
				t.Errorf("%s (%s): bands read as %v, want %v", tc.name, format, got, tc.want)
			}
		}
	}
}

// TestColourNeedsThreeBands: a colour output of other than 3 or 4 bands is
// a programmer's mistake.
func TestColourNeedsThreeBands(t *testing.T) {
	defer func() {
		if recover() == nil {
			t.Error("a 2-band colour output did not panic")
		}
	}()
	Create(filepath.Join(t.TempDir(), "x.tif"), Spec{Grid: Grid{Width: 2, Height: 2}, Bands: 2, DataType: "Byte", Colour: true})
}
