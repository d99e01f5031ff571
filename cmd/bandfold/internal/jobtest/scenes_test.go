package jobtest

import (
	"context"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"bandfold/cmd/bandfold/internal/fold"
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/learn"
	"bandfold/raster"
)

// splitBands writes each band of src as its own single-band GeoTIFF in dir,
// named prefix + "B<n>.TIF" with n from names (GDAL's own gdal_translate does
// the split), and returns the paths in band order.
func splitBands(t *testing.T, src, dir, prefix string, names []int) []string {
	t.Helper()
	if _, err := exec.LookPath("gdal_translate"); err != nil {
		t.Skip("gdal_translate missing (Debian's gdal-bin)")
	}
	var out []string
	for i, n := range names {
		p := filepath.Join(dir, prefix+"B"+strconv.Itoa(n)+".TIF")
		cmd := exec.Command("gdal_translate", "-q", "-b", strconv.Itoa(i+1), src, p)
		if b, err := cmd.CombinedOutput(); err != nil {
			t.Fatalf("gdal_translate: %v: %s", err, b)
		}
		out = append(out, p)
	}
	return out
}

// TestStackOfBandFilesKeepsBandOrder: the Landsat subset split into one
// file per band (names B1..B5, B7 from the file stems) learns the same
// basis as the multiband file; a reordered stack is refused with both
// orders listed, and putting it back in order gives the identical basis.
func TestStackOfBandFilesKeepsBandOrder(t *testing.T) {
	NeedLandsat(t)
	dir := t.TempDir()
	files := splitBands(t, Landsat, dir, "L7_SCENE_", []int{1, 2, 3, 4, 5, 7})
	basis := filepath.Join(dir, "b.json")
	lr := Learn(t, TestEnv, learn.LearnOptions{Scenes: []string{strings.Join(files, ",")}, Out: basis})
	var names []string
	for _, b := range lr.Basis.Bands {
		names = append(names, b.Name)
	}
	if got := strings.Join(names, ","); got != "B1,B2,B3,B4,B5,B7" {
		t.Errorf("band names %s, want B1..B5,B7 from the file stems", got)
	}
	whole := Learn(t, TestEnv, learn.LearnOptions{Scenes: []string{Landsat}, Out: filepath.Join(dir, "whole.json")})
	for i := range whole.Basis.Eigenvalues {
		// The same pixels in the same tiles: gonum-free, known by
		// construction (the files hold the subset's bands unchanged).
		if !RelClose(lr.Basis.Eigenvalues[i], whole.Basis.Eigenvalues[i], 1e-12) {
			t.Errorf("eigenvalue %d: stack %v, multiband file %v", i+1, lr.Basis.Eigenvalues[i], whole.Basis.Eigenvalues[i])
		}
	}
	reordered := append(append([]string(nil), files[1:]...), files[0])
	_, err := fold.Fold(context.Background(), TestEnv, fold.FoldOptions{Scenes: []string{strings.Join(reordered, ",")}, Basis: basis, Out: filepath.Join(dir, "c.tif")})
	WantError(t, "reordered stack", err, false, "[B2, B3, B4, B5, B7, B1]", "[B1, B2, B3, B4, B5, B7]")
	MustNotExist(t, "reordered stack", filepath.Join(dir, "c.tif"))
	back := Learn(t, TestEnv, learn.LearnOptions{Scenes: []string{strings.Join(files, ",")}, Out: filepath.Join(dir, "again.json")})
	if back.Basis.Fingerprint() != lr.Basis.Fingerprint() {
		t.Errorf("the stack in order again gives basis %s, first %s", back.Basis.Fingerprint(), lr.Basis.Fingerprint())
	}
	_, err = learn.Learn(context.Background(), TestEnv, learn.LearnOptions{Scenes: files, Out: filepath.Join(dir, "pooled.json"), Variance: 0.99})
	WantError(t, "single-band files as scenes", err, true, "1 band each", "--stack")
}

// TestTOACalibration: band files of a Landsat 8 product with its MTL file
// beside them (testdata/mtl, key names from the USGS "Landsat 8 (L8) Data
// Users Handbook") are fitted as top-of-atmosphere reflectance: each
// band's mean is (M * mean(Q) + A) / sin(theta_SE), the handbook's formula
// applied to the digital numbers' mean (the conversion is affine, so means
// convert exactly). A thermal band has no reflectance coefficients.
func TestTOACalibration(t *testing.T) {
	dir := t.TempDir()
	const product = "LC08_L1TP_195025_20130707_20200912_02_T1"
	mtl, err := os.ReadFile(filepath.Join("..", "..", "..", "..", "testdata", "mtl", product+"_MTL.txt"))
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(dir, product+"_MTL.txt"), mtl, 0o644); err != nil {
		t.Fatal(err)
	}
	w, h := 32, 24
	var files []string
	dnMeans := map[int]float64{}
	for _, n := range []int{2, 3, 4, 10} {
		buf := make([]float64, w*h)
		sum := 0.0
		for i := range buf {
			buf[i] = float64(7000 + 300*n + (i*37+n*11)%1500)
			sum += buf[i]
		}
		dnMeans[n] = sum / float64(w*h)
		p := filepath.Join(dir, product+"_B"+strconv.Itoa(n)+".TIF")
		WriteRasterFile(t, p, gridSpec(t, w, h, 1, "UInt16", nil), buf)
		files = append(files, p)
	}
	stack := strings.Join(files[:3], ",")
	lr := Learn(t, TestEnv, learn.LearnOptions{Scenes: []string{stack}, Out: filepath.Join(dir, "toa.json"), Input: jobkit.Input{Calibrate: raster.CalibrateTOA}})
	if lr.Basis.Calibration() != "toa" {
		t.Errorf("basis calibration %q, want toa", lr.Basis.Calibration())
	}
	sinSE := math.Sin(58.07014687 * math.Pi / 180) // SUN_ELEVATION of the MTL file
	for i, n := range []int{2, 3, 4} {
		// REFLECTANCE_MULT_BAND_n = 2e-5 + (n-1) 1e-7, ADD = -0.1 - (n-1) 0.001
		// (testdata/README.md).
		m, a := 2e-5+float64(n-1)*1e-7, -0.1-float64(n-1)*0.001
		want := (m*dnMeans[n] + a) / sinSE
		if !RelClose(lr.Basis.Mean[i], want, 1e-12) {
			t.Errorf("band %d TOA mean %v, want (M mean(Q) + A) / sin(theta) = %v", n, lr.Basis.Mean[i], want)
		}
	}
	// Folding the digital numbers with the TOA basis calibrates them too.
	if _, err := fold.Fold(context.Background(), TestEnv, fold.FoldOptions{Scenes: []string{stack}, Basis: filepath.Join(dir, "toa.json"), Out: filepath.Join(dir, "c.tif")}); err != nil {
		t.Errorf("fold with a TOA basis: %v", err)
	}
	_, err = fold.Fold(context.Background(), TestEnv, fold.FoldOptions{Scenes: []string{stack}, Basis: filepath.Join(dir, "toa.json"), Out: filepath.Join(dir, "c2.tif"),
		Input: jobkit.Input{Calibrate: raster.CalibrateScale}})
	WantError(t, "scale on a TOA basis", err, true, "--calibrate scale", "toa")

	thermal := strings.Join([]string{files[0], files[3]}, ",")
	_, err = learn.Learn(context.Background(), TestEnv, learn.LearnOptions{Scenes: []string{thermal}, Out: filepath.Join(dir, "th.json"), Variance: 0.99, Input: jobkit.Input{Calibrate: raster.CalibrateTOA}})
	WantError(t, "thermal band", err, false, "B10", "--bands")
	MustNotExist(t, "thermal band", filepath.Join(dir, "th.json"))

	lone := filepath.Join(t.TempDir(), "scene.tif")
	Synth(t, lone, 3, 20, 10, 1)
	_, err = learn.Learn(context.Background(), TestEnv, learn.LearnOptions{Scenes: []string{lone}, Out: filepath.Join(dir, "x.json"), Variance: 0.99, Input: jobkit.Input{Calibrate: raster.CalibrateTOA}})
	WantError(t, "no MTL file", err, false, filepath.Dir(lone), "MTL")
}

// TestQualityMaskBitsAndMixedResolution: a quality band's bit rule masks
// exactly the pixels with a listed bit set (known by construction), and a
// stack with a band at half the pixel size is refused unless aligned.
func TestQualityMaskBitsAndMixedResolution(t *testing.T) {
	dir := t.TempDir()
	w, h, p := 40, 30, 3
	scene := filepath.Join(dir, "s.tif")
	WriteRasterFile(t, scene, gridSpec(t, w, h, p, "Float32", nil), correlatedPixels(w*h, p, 1, 1))
	qa := make([]float64, w*h)
	clear := 0
	for i := range qa {
		qa[i] = float64((i * 2654435761) % 65536) // spread over all 16 bits
		if int(qa[i])&(1<<3|1<<15) == 0 {
			clear++
		}
	}
	qaPath := filepath.Join(dir, "qa.tif")
	WriteRasterFile(t, qaPath, gridSpec(t, w, h, 1, "UInt16", nil), qa)
	lr := Learn(t, TestEnv, learn.LearnOptions{Scenes: []string{scene}, Out: filepath.Join(dir, "b.json"),
		Input: jobkit.Input{Masks: []raster.MaskRule{{Path: qaPath, Bits: []int{3, 15}}}}})
	if lr.Basis.Pixels != int64(clear) {
		t.Errorf("%d pixels fitted, want the %d whose bits 3 and 15 are clear", lr.Basis.Pixels, clear)
	}

	fine := filepath.Join(dir, "fine.tif")
	spec := gridSpec(t, 2*w, 2*h, 1, "Float32", nil)
	spec.GeoTransform[1], spec.GeoTransform[5] = 5, -5
	buf := make([]float64, 4*w*h)
	for i := range buf {
		buf[i] = float64(i % 97)
	}
	WriteRasterFile(t, fine, spec, buf)
	mixed := scene + "," + fine
	_, err := learn.Learn(context.Background(), TestEnv, learn.LearnOptions{Scenes: []string{mixed}, Out: filepath.Join(dir, "m.json"), Variance: 0.99})
	WantError(t, "mixed resolution", err, false, "fine.tif", "--align")
	m := Learn(t, TestEnv, learn.LearnOptions{Scenes: []string{mixed}, Out: filepath.Join(dir, "m.json"), Input: jobkit.Input{Align: true, Resampling: "average"}})
	if len(m.Basis.Bands) != p+1 || m.Basis.Pixels != int64(w*h) {
		t.Errorf("aligned stack: %d bands, %d pixels; want %d and %d", len(m.Basis.Bands), m.Basis.Pixels, p+1, w*h)
	}
}
