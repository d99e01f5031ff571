package raster

import (
	"archive/zip"
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/airbusgeo/godal"
)

// The two metadata files under ../testdata/mtl (see testdata/README.md): key
// names and layout from the USGS "Landsat 8 (L8) Data Users Handbook",
// values invented, so these constants are known by construction.
const (
	mtlC1 = "../testdata/mtl/LC08_L1TP_195025_20130707_20170503_01_T1_MTL.txt"
	mtlC2 = "../testdata/mtl/LC08_L1TP_195025_20130707_20200912_02_T1_MTL.txt"
	// testSunElevation is SUN_ELEVATION in both files, in degrees.
	testSunElevation = 58.07014687
)

// testReflectance gives REFLECTANCE_MULT_BAND_n and REFLECTANCE_ADD_BAND_n
// as written in both files for reflective band n.
func testReflectance(n int) (mult, add float64) {
	return []float64{2.0000e-05, 2.0100e-05, 2.0200e-05, 2.0300e-05, 2.0400e-05, 2.0500e-05, 2.0600e-05, 2.0700e-05, 2.0800e-05}[n-1],
		[]float64{-0.100, -0.101, -0.102, -0.103, -0.104, -0.105, -0.106, -0.107, -0.108}[n-1]
}

func TestReadMTL(t *testing.T) {
	tests := []struct {
		path, product, level string
		quality              bool // FILE_NAME_BAND_QUALITY (Collection 1 only)
	}{
		{mtlC1, "LC08_L1TP_195025_20130707_20170503_01_T1", "L1TP", true},
		{mtlC2, "LC08_L1TP_195025_20130707_20200912_02_T1", "L1TP", false},
	}
	for _, tc := range tests {
		m, err := ReadMTL(tc.path)
		if err != nil {
			t.Fatal(err)
		}
		if m.Path != tc.path || m.SpacecraftID != "LANDSAT_8" || m.DateAcquired != "2013-07-07" ||
			m.SunElevation != testSunElevation || m.ProcessingLevel != tc.level {
			t.Errorf("%s: %s %s %v %s", tc.path, m.SpacecraftID, m.DateAcquired, m.SunElevation, m.ProcessingLevel)
		}
		for n := 1; n <= 11; n++ {
			file := fmt.Sprintf("%s_B%d.TIF", tc.product, n)
			if got := m.BandFiles[fmt.Sprint(n)]; got != file {
				t.Errorf("%s: FILE_NAME_BAND_%d = %q, want %q", tc.path, n, got, file)
			}
			if band, ok := m.BandOf(strings.ToLower(file)); !ok || band != fmt.Sprint(n) {
				t.Errorf("%s: BandOf(%s) = %q, %v", tc.path, file, band, ok)
			}
			mult, add, err := m.Reflectance(fmt.Sprint(n))
			if n >= 10 {
				if !errors.Is(err, errNoReflectance) {
					t.Errorf("%s: thermal band %d: %v %v %v", tc.path, n, mult, add, err)
				}
				continue
			}
			wantM, wantA := testReflectance(n)
			if err != nil || mult != wantM || add != wantA {
				t.Errorf("%s: band %d: %v %v %v; want %v %v", tc.path, n, mult, add, err, wantM, wantA)
			}
		}
		if _, ok := m.BandFiles["QUALITY"]; ok != tc.quality {
			t.Errorf("%s: quality band listed %v", tc.path, ok)
		}
		if len(m.ReflMult) != 9 || len(m.ReflAdd) != 9 {
			t.Errorf("%s: %d and %d reflectance coefficients, want 9 and 9", tc.path, len(m.ReflMult), len(m.ReflAdd))
		}
	}
}

// level2MTL is a Collection 2 Level-2 layout: surface reflectance scale
// factors in their own group beside the Level-1 coefficients.
const level2MTL = `GROUP = LANDSAT_METADATA_FILE
  GROUP = PRODUCT_CONTENTS
    PROCESSING_LEVEL = "L2SP"
    FILE_NAME_BAND_1 = "LC08_L2SP_195025_20130707_20200912_02_T1_SR_B1.TIF"
  END_GROUP = PRODUCT_CONTENTS
  GROUP = IMAGE_ATTRIBUTES
    SPACECRAFT_ID = "LANDSAT_8"
    DATE_ACQUIRED = 2013-07-07
    SUN_ELEVATION = 58.07014687
  END_GROUP = IMAGE_ATTRIBUTES
  GROUP = LEVEL2_SURFACE_REFLECTANCE_PARAMETERS
    REFLECTANCE_MULT_BAND_1 = 2.75E-05
    REFLECTANCE_ADD_BAND_1 = -0.2
  END_GROUP = LEVEL2_SURFACE_REFLECTANCE_PARAMETERS
  GROUP = LEVEL1_RADIOMETRIC_RESCALING
    REFLECTANCE_MULT_BAND_1 = 2.0000E-05
    REFLECTANCE_ADD_BAND_1 = -0.100000
  END_GROUP = LEVEL1_RADIOMETRIC_RESCALING
END_GROUP = LANDSAT_METADATA_FILE
END
`

func TestReadMTLLevel2Groups(t *testing.T) {
	m, err := parseMTL("L2_MTL.txt", []byte(level2MTL))
	if err != nil {
		t.Fatal(err)
	}
	// Known by construction: only the Level-1 group's pair is taken.
	if mult, add, err := m.Reflectance("1"); err != nil || mult != 2e-5 || add != -0.1 || m.ProcessingLevel != "L2SP" {
		t.Errorf("band 1: %v %v %v, level %s", mult, add, err, m.ProcessingLevel)
	}
}

func TestReadMTLErrors(t *testing.T) {
	good, err := os.ReadFile(mtlC1)
	if err != nil {
		t.Fatal(err)
	}
	without := func(key string) string {
		var keep []string
		for _, l := range strings.Split(string(good), "\n") {
			if !strings.HasPrefix(strings.TrimSpace(l), key+" ") {
				keep = append(keep, l)
			}
		}
		return strings.Join(keep, "\n")
	}
	tests := []struct {
		name, text, want string
	}{
		{"no sun elevation", without("SUN_ELEVATION"), "x_MTL.txt: no SUN_ELEVATION"},
		{"no date", without("DATE_ACQUIRED"), "x_MTL.txt: no DATE_ACQUIRED"},
		{"no spacecraft", without("SPACECRAFT_ID"), "x_MTL.txt: no SPACECRAFT_ID"},
		{"no band files", "GROUP = A\nSPACECRAFT_ID = \"LANDSAT_8\"\nDATE_ACQUIRED = 2013-07-07\nSUN_ELEVATION = 50\nEND_GROUP = A\nEND\n", "x_MTL.txt: no FILE_NAME_BAND_n"},
		{"bad number", strings.Replace(string(good), "SUN_ELEVATION = 58.07014687", "SUN_ELEVATION = high", 1), "x_MTL.txt: SUN_ELEVATION = high is not a number"},
		{"bad coefficient", strings.Replace(string(good), "REFLECTANCE_ADD_BAND_4 = -0.103000", "REFLECTANCE_ADD_BAND_4 = ?", 1), "x_MTL.txt: REFLECTANCE_ADD_BAND_4 = ? is not a number"},
		{"unclosed group", "GROUP = A\nGROUP = B\nEND_GROUP = B\n", "x_MTL.txt: GROUP = A is not closed"},
		{"wrong end", "GROUP = A\nEND_GROUP = B\n", "x_MTL.txt: line 2: END_GROUP = B closes no open group of that name"},
		{"not ODL", "GROUP = A\nhello\n", `x_MTL.txt: line 2: want NAME = VALUE, got "hello"`},
	}
	for _, tc := range tests {
		_, err := parseMTL("x_MTL.txt", []byte(tc.text))
		if err == nil || !strings.Contains(err.Error(), tc.want) || strings.Contains(err.Error(), "\n") {
			t.Errorf("%s: got %v, want %q", tc.name, err, tc.want)
		}
	}
	if _, err := ReadMTL(filepath.Join(t.TempDir(), "missing_MTL.txt")); !errors.Is(err, ErrNotFound) || !strings.Contains(err.Error(), "missing_MTL.txt") {
		t.Errorf("missing file: got %v", err)
	}
}

func FuzzReadMTL(f *testing.F) {
	for _, p := range []string{mtlC1, mtlC2} {
		data, err := os.ReadFile(p)
		if err != nil {
			f.Fatal(err)
		}
		f.Add(data)
	}
	for _, s := range []string{level2MTL, "", "END", "GROUP = A\n", "END_GROUP = A\n", "A = \"\nB =", "=\n", "FILE_NAME_BAND_ = x\n"} {
		f.Add([]byte(s))
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		m, err := parseMTL("fuzz_MTL.txt", data)
		if err != nil {
			if strings.Contains(err.Error(), "\n") {
				t.Fatalf("error on several lines: %q", err)
			}
			return
		}
		if len(m.BandFiles) == 0 || math.IsNaN(m.SunElevation) || math.IsInf(m.SunElevation, 0) || m.SpacecraftID == "" {
			t.Fatalf("accepted %+v", m)
		}
	})
}

// landsatProduct copies an MTL file into a new folder and writes, beside it,
// the band files it lists for the given bands: UInt16, 4 x 3 pixels, DN
// 0 (fill) at pixel 0 and 7000 + 1000*band + 37*i elsewhere.
func landsatProduct(t *testing.T, mtl string, bands ...int) (dir string, paths []string) {
	t.Helper()
	dir = t.TempDir()
	data, err := os.ReadFile(mtl)
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(dir, filepath.Base(mtl)), data, 0o644); err != nil {
		t.Fatal(err)
	}
	product := strings.TrimSuffix(filepath.Base(mtl), "_MTL.txt")
	for _, n := range bands {
		r := defaultRaster()
		r.w, r.h, r.bands, r.dtype = 4, 3, 1, godal.UInt16
		r.values = func(x, y, _ int) float64 { return landsatDN(n, y*4+x) }
		paths = append(paths, r.write(t, filepath.Join(dir, fmt.Sprintf("%s_B%d.TIF", product, n))))
	}
	return dir, paths
}

func landsatDN(band, i int) float64 {
	if i == 0 {
		return 0
	}
	return float64(7000 + 1000*band + 37*i)
}

func TestFindMTL(t *testing.T) {
	dir, paths := landsatProduct(t, mtlC2, 4)
	got, err := FindMTL(paths[0])
	if want := filepath.Join(dir, filepath.Base(mtlC2)); err != nil || got != want {
		t.Errorf("FindMTL = %q, %v; want %q", got, err, want)
	}
	// A file no MTL lists, and a folder without MTL files.
	stray := defaultRaster().write(t, filepath.Join(dir, "stray.tif"))
	lone := defaultRaster().write(t, filepath.Join(t.TempDir(), "lone.tif"))
	for _, p := range []string{stray, lone} {
		_, err := FindMTL(p)
		if err == nil || !strings.Contains(err.Error(), filepath.Dir(p)) || !strings.Contains(err.Error(), filepath.Base(p)) {
			t.Errorf("FindMTL(%s) = %v, want an error naming the folder and the file", p, err)
		}
	}
}

// TestCalibrateTOA checks the reflectance read against the handbook's
// formula rho = (M_rho*Q_cal + A_rho)/sin(theta_SE) evaluated here from the
// constants written in the MTL files, for both collection layouts.
func TestCalibrateTOA(t *testing.T) {
	for _, mtl := range []string{mtlC1, mtlC2} {
		_, paths := landsatProduct(t, mtl, 2, 3)
		s, err := Open(paths, Calibrate("toa"), NoData([]float64{0}))
		if err != nil {
			t.Fatal(err)
		}
		if s.Bands[0].Name != "B2" || s.Bands[1].Name != "B3" {
			t.Errorf("names %s %s", s.Bands[0].Name, s.Bands[1].Name)
		}
		sin := math.Sin(testSunElevation * math.Pi / 180)
		got, valid, n := readAll(t, s)
		if n != 11 || valid[0] {
			t.Errorf("%s: %d valid pixels (fill at pixel 0 valid: %v), want 11", mtl, n, valid[0])
		}
		for k, band := range []int{2, 3} {
			b := s.Bands[k]
			mult, add := testReflectance(band)
			if b.Calibration != CalibrateTOA || b.ReflMult != mult || b.ReflAdd != add || b.SunElevation != testSunElevation {
				t.Errorf("%s band %d: %+v", mtl, band, b)
			}
			for i := 1; i < 12; i++ {
				q := landsatDN(band, i)
				want := (mult*q + add) / sin
				// The reader applies q*(M/sin) + A/sin: the same up to
				// rounding, a few units in the last place of the terms.
				tol := 1e-12 * (math.Abs(mult*q) + math.Abs(add)) / sin
				if v := got[2*i+k]; math.Abs(v-want) > tol {
					t.Errorf("%s band %d pixel %d: %v, want %v", mtl, band, i, v, want)
				}
			}
		}
		s.Close()
	}
	// The default stays the scale metadata.
	_, paths := landsatProduct(t, mtlC1, 2)
	s, err := Open(paths)
	if err != nil {
		t.Fatal(err)
	}
	if b := s.Bands[0]; b.Calibration != CalibrateScale || b.Scale != 1 || b.Offset != 0 || b.ReflMult != 0 {
		t.Errorf("default calibration: %+v", b)
	}
}

func TestCalibrateTOAErrors(t *testing.T) {
	_, paths := landsatProduct(t, mtlC1, 4, 10)
	lone := defaultRaster()
	lone.bands = 1
	lonePath := lone.write(t, filepath.Join(t.TempDir(), "lone_B1.TIF"))

	// A product whose MTL lacks one coefficient.
	good, _ := os.ReadFile(mtlC1)
	partial := t.TempDir()
	text := strings.Replace(string(good), "    REFLECTANCE_ADD_BAND_5 = -0.104000\n", "", 1)
	os.WriteFile(filepath.Join(partial, filepath.Base(mtlC1)), []byte(text), 0o644)
	five := defaultRaster()
	five.bands = 1
	fivePath := five.write(t, filepath.Join(partial, "LC08_L1TP_195025_20130707_20170503_01_T1_B5.TIF"))

	// A Level-2 product.
	l2 := t.TempDir()
	os.WriteFile(filepath.Join(l2, "LC08_L2SP_195025_20130707_20200912_02_T1_MTL.txt"), []byte(level2MTL), 0o644)
	sr := five.write(t, filepath.Join(l2, "LC08_L2SP_195025_20130707_20200912_02_T1_SR_B1.TIF"))

	tests := []struct {
		name  string
		paths []string
		want  []string
	}{
		{"thermal band", paths, []string{"band B10", "not a reflective band", "REFLECTANCE_MULT_BAND_10", "--bands", "_MTL.txt"}},
		{"no MTL", []string{lonePath}, []string{filepath.Dir(lonePath), "no *_MTL.txt"}},
		{"missing key", []string{fivePath}, []string{filepath.Base(mtlC1), "REFLECTANCE_ADD_BAND_5"}},
		{"Level-2", []string{sr}, []string{"Level-2", "L2SP"}},
	}
	for _, tc := range tests {
		_, err := Open(tc.paths, Calibrate("toa"))
		if err == nil || strings.Contains(err.Error(), "\n") {
			t.Errorf("%s: got %v, want a one-line error", tc.name, err)
			continue
		}
		for _, w := range tc.want {
			if !strings.Contains(err.Error(), w) {
				t.Errorf("%s: %q does not say %q", tc.name, err, w)
			}
		}
	}
	if _, err := Open(paths[:1], Calibrate("radiance")); !errors.Is(err, ErrBadSpec) {
		t.Errorf("unknown calibration: got %v, want ErrBadSpec", err)
	}
}

// TestFindMTLInZip finds and reads the MTL file inside a zip archive
// through GDAL's /vsizip/, as for a product never unpacked.
func TestFindMTLInZip(t *testing.T) {
	dir, paths := landsatProduct(t, mtlC1, 2)
	archive := filepath.Join(t.TempDir(), "product.zip")
	f, err := os.Create(archive)
	if err != nil {
		t.Fatal(err)
	}
	zw := zip.NewWriter(f)
	for _, p := range []string{filepath.Join(dir, filepath.Base(mtlC1)), paths[0]} {
		data, err := os.ReadFile(p)
		if err != nil {
			t.Fatal(err)
		}
		w, err := zw.Create("scene/" + filepath.Base(p))
		if err != nil {
			t.Fatal(err)
		}
		w.Write(data)
	}
	if err := zw.Close(); err != nil {
		t.Fatal(err)
	}
	f.Close()
	band := "/vsizip/" + archive + "/scene/" + filepath.Base(paths[0])
	got, err := FindMTL(band)
	if want := "/vsizip/" + archive + "/scene/" + filepath.Base(mtlC1); err != nil || got != want {
		t.Fatalf("FindMTL(%s) = %q, %v; want %q", band, got, err, want)
	}
	s, err := Open([]string{band}, Calibrate("toa"))
	if err != nil {
		t.Fatal(err)
	}
	// Known by construction: band 2's coefficients in the MTL file.
	if mult, add := testReflectance(2); s.Bands[0].ReflMult != mult || s.Bands[0].ReflAdd != add {
		t.Errorf("band from the zip: %+v", s.Bands[0])
	}
}
