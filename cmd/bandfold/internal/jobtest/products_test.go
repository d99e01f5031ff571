package jobtest

import (
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"reflect"
	"strings"
	"testing"

	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/learn"
	"bandfold/cmd/bandfold/internal/pairchange"
	"bandfold/cmd/bandfold/internal/series"
	"bandfold/raster"
	"bandfold/tiles"
	"bandfold/tiles/testenv"
)

// The product fixtures of make testdata (scripts/products.sh): real Landsat
// pixels in the layouts of a Landsat Collection 2 Level-2 product and of a
// Sentinel-2 Level-2A product folder (testdata/README.md).
const (
	productsDir = "../../../../testdata/external/products"
	l8Level2    = "LC08_L2SP_195025_20130707_20200912_02_T1"
	l7Level2    = "LE07_L2SP_195025_20010730_20200915_02_T1"
	s2a         = "S2A_MSIL2A_20230614T103021_N0509_R108_T32UMU_20230614T140000.SAFE"
	s2b         = "S2B_MSIL2A_20240618T103019_N0510_R108_T32UMU_20240618T140000.SAFE"
)

// product returns the path of a fixture under productsDir, failing under CI
// when make testdata has not built it.
func product(t *testing.T, parts ...string) string {
	t.Helper()
	p := filepath.Join(append([]string{productsDir}, parts...)...)
	testenv.NeedFile(t, p, "make testdata")
	return p
}

// level2Bands joins the surface reflectance files of a Level-2 product.
func level2Bands(t *testing.T, id string, bands ...string) string {
	var paths []string
	for _, b := range bands {
		paths = append(paths, product(t, id, id+"_SR_B"+b+".TIF"))
	}
	return strings.Join(paths, ",")
}

// meanDN is the mean of the valid digital numbers of a one-band file, read
// with no calibration.
func meanDN(t *testing.T, path string) float64 {
	t.Helper()
	_, buf, valid := ReadImage(t, path, tiles.Tile{})
	var sum float64
	var n int
	for i, ok := range valid {
		if ok {
			sum += buf[i]
			n++
		}
	}
	return sum / float64(n)
}

// TestLevel2SurfaceReflectance: --calibrate reflectance on a Landsat
// Collection 2 Level-2 product whose MTL carries both the Level-2 and the
// Level-1 groups gives the basis means DN x 2.75e-05 - 0.2, the Level-2
// group's coefficients (USGS Landsat 8-9 Collection 2 Level 2 Science
// Product Guide), to 1e-9 relative, and not the Level-1 group's 2e-05 and
// -0.1; --calibrate toa on it is refused; the thermal ST band is refused.
func TestLevel2SurfaceReflectance(t *testing.T) {
	dir := t.TempDir()
	bands := []string{"2", "3", "4", "5", "6", "7"}
	res := Learn(t, TestEnv, learn.LearnOptions{Scenes: []string{level2Bands(t, l8Level2, bands...)},
		Input: jobkit.Input{Calibrate: raster.CalibrateReflectance}, Out: filepath.Join(dir, "l2.json")})
	for i, b := range bands {
		dn := meanDN(t, product(t, l8Level2, l8Level2+"_SR_B"+b+".TIF"))
		want, level1 := dn*2.75e-05-0.2, dn*2e-05-0.1
		if got := res.Basis.Mean[i]; math.Abs(got-want) > 1e-9*math.Abs(want) {
			t.Errorf("band %s: mean %.12g, want %.12g (DN %.6g x 2.75e-05 - 0.2); the Level-1 group would give %.6g", b, got, want, dn, level1)
		}
	}
	if c := res.Basis.Bands[0].Calibration; c != raster.CalibrateReflectance {
		t.Errorf("the basis records calibration %q, want reflectance", c)
	}
	_, err := learn.Learn(t.Context(), TestEnv, learn.LearnOptions{Scenes: []string{level2Bands(t, l8Level2, bands...)},
		Input: jobkit.Input{Calibrate: raster.CalibrateTOA}, Out: filepath.Join(dir, "toa.json"), Variance: DefaultVariance})
	WantError(t, "toa on Level 2", err, false, "Level-2 product", "--calibrate reflectance")
	thermal := product(t, l8Level2, l8Level2+"_ST_B10.TIF")
	_, err = learn.Learn(t.Context(), TestEnv, learn.LearnOptions{Scenes: []string{level2Bands(t, l8Level2, "4", "5") + "," + thermal},
		Input: jobkit.Input{Calibrate: raster.CalibrateReflectance}, Out: filepath.Join(dir, "st.json"), Variance: DefaultVariance})
	WantError(t, "thermal band", err, false, "ST_B10", "not a reflective band")
	MustNotExist(t, "refusals", filepath.Join(dir, "st.json"))
}

// TestSentinel2ProductFolder: a Sentinel-2 L2A product folder as IMAGE, with
// --calibrate reflectance, gives per band the mean of (DN - 1000) / 10000
// (the product's BOA_ADD_OFFSET and BOA_QUANTIFICATION_VALUE); its 20 m
// bands are resampled onto the 10 m grid bilinearly, as GDAL's gdalwarp
// does it (the outside reference for the 20 m means); the date comes from
// the product's metadata.
func TestSentinel2ProductFolder(t *testing.T) {
	testenv.NeedTool(t, "gdalwarp", "gdal-bin")
	dir := t.TempDir()
	folder := product(t, s2a)
	sel := []string{"B02", "B04", "B08", "B11"}
	env, log := LoggingEnv()
	res := Learn(t, env, learn.LearnOptions{Scenes: []string{folder}, Input: jobkit.Input{BandNames: sel, Calibrate: raster.CalibrateReflectance},
		Out: filepath.Join(dir, "s2.json")})
	if !strings.Contains(log.String(), "bands B11 resampled (bilinear) onto the 10 m grid of B02") {
		t.Errorf("the resampling of the 20 m band is not stated: %q", log.String())
	}
	img := filepath.Join(folder, "GRANULE", "L2A_T32UMU_A000000_20230614T103021", "IMG_DATA")
	for i, band := range sel {
		file := filepath.Join(img, "R10m", "T32UMU_20230614T103021_"+band+"_10m.jp2")
		if band == "B11" {
			// GDAL's own warp of the 20 m file onto the 10 m grid.
			src := filepath.Join(img, "R20m", "T32UMU_20230614T103021_B11_20m.jp2")
			file = filepath.Join(dir, "B11_10m.tif")
			out, err := exec.Command("gdalwarp", "-q", "-tr", "10", "10", "-te", "500000", "5499600", "500400", "5500000",
				"-r", "bilinear", "-srcnodata", "0", "-dstnodata", "0", src, file).CombinedOutput()
			if err != nil {
				t.Fatalf("gdalwarp: %v: %s", err, out)
			}
		}
		want := (meanDN(t, file) - 1000) / 10000
		if got := res.Basis.Mean[i]; math.Abs(got-want) > 1e-6*math.Abs(want) {
			t.Errorf("%s: mean %.9g, want %.9g", band, got, want)
		}
		if res.Basis.Bands[i].Name != band {
			t.Errorf("band %d is named %q, want %s", i+1, res.Basis.Bands[i].Name, band)
		}
	}
	d, _, err := raster.SceneDate(folder)
	if err != nil || d.Label != "2023-06-14" || !strings.Contains(d.Source, "DATATAKE_SENSING_START") {
		t.Errorf("date %+v, %v; want 2023-06-14 from the metadata", d, err)
	}
}

// TestQualityNamesEqualTheirBits: a mask by the products' quality names
// gives the same basis, bit for bit, as its bits= or values= spelling on the
// fixtures (USGS QA_PIXEL bit index; ESA SCL classes).
func TestQualityNamesEqualTheirBits(t *testing.T) {
	dir := t.TempDir()
	qa := product(t, l8Level2, l8Level2+"_QA_PIXEL.TIF")
	scl := filepath.Join(product(t, s2a), "GRANULE", "L2A_T32UMU_A000000_20230614T103021", "IMG_DATA", "R20m", "T32UMU_20230614T103021_SCL_20m.jp2")
	cases := []struct {
		name, scene, named, plain string
		bandNames                 []string
	}{
		{"QA_PIXEL", level2Bands(t, l8Level2, "2", "3", "4", "5"), qa + ":qa_pixel=fill,cloud,cloud_shadow", qa + ":bits=0,3,4", nil},
		{"SCL", product(t, s2a), scl + ":scl=clouds", scl + ":values=3,8-10", []string{"B02", "B03", "B04", "B08"}},
	}
	for _, tc := range cases {
		fit := func(spec, name string) []float64 {
			rule, err := raster.ParseMask(spec)
			if err != nil {
				t.Fatal(err)
			}
			res := Learn(t, TestEnv, learn.LearnOptions{Scenes: []string{tc.scene}, Out: filepath.Join(dir, tc.name+name+".json"),
				Input: jobkit.Input{Masks: []raster.MaskRule{rule}, BandNames: tc.bandNames, Calibrate: raster.CalibrateReflectance}})
			return append(res.Basis.Mean, res.Basis.Eigenvalues...)
		}
		named, plain := fit(tc.named, "named"), fit(tc.plain, "plain")
		if !reflect.DeepEqual(named, plain) {
			t.Errorf("%s: the named rule gives %v, its plain spelling %v", tc.name, named, plain)
		}
		none := Learn(t, TestEnv, learn.LearnOptions{Scenes: []string{tc.scene}, Out: filepath.Join(dir, tc.name+"none.json"),
			Input: jobkit.Input{BandNames: tc.bandNames, Calibrate: raster.CalibrateReflectance}})
		if reflect.DeepEqual(none.Basis.Mean, named[:len(none.Basis.Mean)]) {
			t.Errorf("%s: the mask masked nothing: the test would pass without it", tc.name)
		}
	}
}

// TestChangeOnProducts: change runs on two Sentinel-2 product folders and on
// a Landsat 7 / Landsat 8 Level-2 pair as delivered, in reflectance, dated
// from their metadata without --dates, the Landsat bands matched by
// wavelength.
func TestChangeOnProducts(t *testing.T) {
	dir := t.TempDir()
	s2 := RunChange(t, TestEnv, pairchange.ChangeOptions{Before: product(t, s2a), After: product(t, s2b), SharedOptions: series.SharedOptions{Input: jobkit.Input{Calibrate: raster.CalibrateReflectance, BandNames: []string{"B02", "B03", "B04", "B08", "B11", "B12"}}, Out: filepath.Join(dir, "s2")}})
	if s2.BeforeDate != "2023-06-14" || s2.AfterDate != "2024-06-18" {
		t.Errorf("Sentinel-2 dates %s and %s, want 2023-06-14 and 2024-06-18 from MTD_MSIL2A.xml", s2.BeforeDate, s2.AfterDate)
	}
	l7 := level2Bands(t, l7Level2, "1", "2", "3", "4", "5", "7")
	l8 := level2Bands(t, l8Level2, "1", "2", "3", "4", "5", "6", "7")
	ls := RunChange(t, TestEnv, pairchange.ChangeOptions{Before: l7, After: l8, SharedOptions: series.SharedOptions{Input: jobkit.Input{Calibrate: raster.CalibrateReflectance}, Out: filepath.Join(dir, "landsat")}})
	if ls.BeforeDate != "2001-07-30" || ls.AfterDate != "2013-07-07" || !strings.Contains(ls.BandMatch, "OLI_TIRS band 2") {
		t.Errorf("Landsat Level-2 pair: dates %s, %s, band match %q", ls.BeforeDate, ls.AfterDate, ls.BandMatch)
	}
	if _, err := os.Stat(filepath.Join(dir, "landsat", "change.tif")); err != nil {
		t.Error(err)
	}
}
