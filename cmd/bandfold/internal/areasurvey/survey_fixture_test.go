package areasurvey_test

import (
	"os"
	"path/filepath"
	"strings"
	"testing"

	"bandfold/cmd/bandfold/internal/areasurvey"
	"bandfold/cmd/bandfold/internal/jobtest"
	"bandfold/raster"
)

// Sizes of the map of pixelSurvey, known by construction: 60 x 50 pixels
// without a CRS (so areas are pixel counts), the first 7 columns of the
// first 43 rows change.
const (
	pxWidth, pxHeight = 60, 50
	pxChange          = 7 * 43
	pxNoChange        = pxWidth*pxHeight - pxChange
	pxDrawn           = 100
)

// pixelSurvey draws a survey of 100 points (at least 20 per stratum) from
// the map described above and labels every point with its map class, as a
// perfect interpreter would; it returns the map and the labelled CSV.
// With every label equal to the map class, the estimated area of each
// class is its mapped area (known by construction: every stratum's
// reference proportion is 1), with a standard error of 0.
func pixelSurvey(t *testing.T, dir string) (mapPath, csvPath string) {
	t.Helper()
	mapPath = filepath.Join(dir, "map.tif")
	buf := make([]float64, pxWidth*pxHeight)
	for y := range 43 {
		for x := range 7 {
			buf[y*pxWidth+x] = 1
		}
	}
	jobtest.WriteRasterFile(t, mapPath, raster.Spec{Grid: raster.Grid{Width: pxWidth, Height: pxHeight}, Bands: 1, DataType: "Byte"}, buf)
	gpkg := filepath.Join(dir, "survey.gpkg")
	if _, err := areasurvey.SurveyDraw(t.Context(), jobtest.TestEnv, areasurvey.SurveyDrawOptions{Map: mapPath, Out: gpkg, Points: pxDrawn, Buffer: "0", MinPerStratum: 20, Seed: 5}); err != nil {
		t.Fatal(err)
	}
	csvPath = filepath.Join(dir, "survey.csv")
	writeText(t, csvPath, labelRows(t, readText(t, csvPath), func(_ int, mapClass string) string { return mapClass }))
	return mapPath, csvPath
}

// labelRows fills the reference column of every data row of a survey
// CSV with label(row index from 0, map class).
func labelRows(t *testing.T, text string, label func(i int, mapClass string) string) string {
	t.Helper()
	lines := strings.Split(strings.TrimSuffix(text, "\n"), "\n")
	for i := 2; i < len(lines); i++ {
		f := strings.Split(lines[i], ",")
		f[len(f)-1] = label(i-2, f[2])
		lines[i] = strings.Join(f, ",")
	}
	return strings.Join(lines, "\n") + "\n"
}

func readText(t *testing.T, path string) string {
	t.Helper()
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	return string(data)
}

func writeText(t *testing.T, path, text string) {
	t.Helper()
	if err := os.WriteFile(path, []byte(text), 0o666); err != nil {
		t.Fatal(err)
	}
}

// editRows applies edit to the data rows (after the first line and the
// header) of a survey CSV.
func editRows(text string, edit func(rows []string) []string) string {
	lines := strings.Split(strings.TrimSuffix(text, "\n"), "\n")
	rows := edit(append([]string(nil), lines[2:]...))
	return strings.Join(append(lines[:2:2], rows...), "\n") + "\n"
}
