package raster

import (
	"os"
	"path/filepath"
	"testing"
)

// landsatDir holds the real Landsat 7 ETM+ (2001) and Landsat 8 OLI (2013)
// band files and MTLs of r-cran-satellite (make testdata).
const landsatDir = "../testdata/external/landsat"

// landsatFiles returns the band files of one product, failing under CI
// when make testdata has not run.
func landsatFiles(t *testing.T, product string, bands ...string) []string {
	t.Helper()
	var out []string
	for _, b := range bands {
		p := filepath.Join(landsatDir, product+"_B"+b+".TIF")
		if _, err := os.Stat(p); err != nil {
			if os.Getenv("CI") != "" {
				t.Fatalf("%s missing under CI: make testdata failed", p)
			}
			t.Skipf("%s missing: run make testdata", p)
		}
		out = append(out, p)
	}
	return out
}

const (
	l7Product = "LE07_L1TP_195025_20010730_20170204_01_T1"
	l8Product = "LC08_L1TP_195025_20130707_20170503_01_T1"
)

// TestLandsatBandRanges: the bands of the real Landsat 7 and 8 files get
// their sensor's nominal band edges from SPACECRAFT_ID and SENSOR_ID of the
// MTL beside them (USGS Landsat 7 and Landsat 8 Data Users Handbooks' band
// tables): ETM+ band 4 is 775-900 nm, OLI band 5 851-879 nm, OLI band 1
// 435-451 nm.
func TestLandsatBandRanges(t *testing.T) {
	for _, tc := range []struct {
		product, band  string
		lo, hi         float64
		name, sensorID string
	}{
		{l7Product, "4", 775, 900, "nir", "LANDSAT_7 ETM"},
		{l7Product, "1", 450, 515, "blue", "LANDSAT_7 ETM"},
		{l8Product, "5", 851, 879, "nir08", "LANDSAT_8 OLI_TIRS"},
		{l8Product, "1", 435, 451, "coastal", "LANDSAT_8 OLI_TIRS"},
	} {
		s, err := Open(landsatFiles(t, tc.product, tc.band))
		if err != nil {
			t.Fatal(err)
		}
		b := s.Bands[0]
		s.Close()
		if b.Range.LoNM != tc.lo || b.Range.HiNM != tc.hi || b.Range.Name != tc.name || b.Range.Sensor != tc.sensorID {
			t.Errorf("%s band %s: range %+v, want %g-%g nm %s of %s", tc.product, tc.band, b.Range, tc.lo, tc.hi, tc.name, tc.sensorID)
		}
		if want := (tc.lo + tc.hi) / 2; b.WavelengthNM != want {
			t.Errorf("%s band %s: centre %g nm, want %g", tc.product, tc.band, b.WavelengthNM, want)
		}
	}
}
