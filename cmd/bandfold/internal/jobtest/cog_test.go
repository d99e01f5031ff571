package jobtest

import (
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"bandfold/cmd/bandfold/internal/fold"
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/learn"
	"bandfold/cmd/bandfold/internal/pairchange"
	"bandfold/cmd/bandfold/internal/series"
	"bandfold/cmd/bandfold/internal/timeline"
	"bandfold/raster"
	"bandfold/tiles/testenv"
)

// cogValidator is GDAL's own COG validator, shipped in Debian's
// python3-gdal.
const cogValidator = "/usr/lib/python3/dist-packages/osgeo_utils/samples/validate_cloud_optimized_geotiff.py"

// TestOutputsAreValidCOGs: with the COG format, every raster fold, change
// and timeline write passes GDAL's COG validator
// (validate_cloud_optimized_geotiff.py, errors and warnings alike), has
// overviews (a 600 x 600 scene, above the COG driver's 512-pixel block),
// and keeps the GeoTIFF path's compression (gdalinfo's COMPRESSION).
func TestOutputsAreValidCOGs(t *testing.T) {
	testenv.NeedFile(t, cogValidator, "apt-get install python3-gdal")
	testenv.NeedTool(t, "gdalinfo", "gdal-bin")
	dir := t.TempDir()
	f := ScenarioFiles(t, dir, 600, 11)
	cog := jobkit.OutputFormat{Format: raster.COG}
	chg := filepath.Join(dir, "change")
	RunChange(t, TestEnv, pairchange.ChangeOptions{Before: f.Before, After: f.After, PValues: true, SharedOptions: series.SharedOptions{Out: chg, Output: cog}})
	third := thirdDate(t, f.Before, dir)
	tl := filepath.Join(dir, "timeline")
	if _, err := timeline.Timeline(t.Context(), TestEnv, timeline.TimelineOptions{Scenes: []string{f.Before, f.After, third}, SharedOptions: series.SharedOptions{Out: tl, Output: cog}}); err != nil {
		t.Fatal(err)
	}
	basis := filepath.Join(dir, "b.json")
	Learn(t, TestEnv, learn.LearnOptions{Scenes: []string{f.Before}, Out: basis, Components: 3})
	folded := filepath.Join(dir, "components.tif")
	Fold(t, TestEnv, fold.FoldOptions{Scenes: []string{f.Before}, Basis: basis, Out: folded, Format: raster.COG})
	// fold's STAC Item beside its output: the Item's fields, and its asset
	// is the output.
	item := jobkit.ItemPath(folded)
	ValidJSONFile(t, "stac-item", item)
	if data, err := os.ReadFile(item); err != nil || !strings.Contains(string(data), `"href": "./components.tif"`) || !strings.Contains(string(data), "profile=cloud-optimized") {
		t.Errorf("%s: %v\n%s", item, err, data)
	}
	files, _ := filepath.Glob(filepath.Join(chg, "*.tif"))
	more, _ := filepath.Glob(filepath.Join(tl, "*.tif"))
	files = append(append(files, more...), folded)
	if len(files) < 8 {
		t.Fatalf("only %d rasters: %v", len(files), files)
	}
	for _, file := range files {
		out, err := exec.Command("/usr/bin/python3", cogValidator, file).CombinedOutput()
		if err != nil || strings.Contains(string(out), "arning") {
			t.Errorf("%s: not a valid COG: %v: %s", filepath.Base(file), err, out)
		}
		info, err := exec.Command("gdalinfo", file).CombinedOutput()
		if err != nil {
			t.Fatal(err)
		}
		if !strings.Contains(string(info), "Overviews:") || !strings.Contains(string(info), "LAYOUT=COG") {
			t.Errorf("%s: no overviews or not COG-laid-out:\n%s", filepath.Base(file), info)
		}
	}
}
