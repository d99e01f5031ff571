package pairchange_test

import (
	"bytes"
	"os"
	"os/exec"
	"path/filepath"
	"testing"

	"bandfold/cmd/bandfold/internal/changefolder"
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/jobtest"
	"bandfold/cmd/bandfold/internal/pairchange"
	"bandfold/cmd/bandfold/internal/series"
	"bandfold/tiles/testenv"
	"bandfold/transform/change"
)

// TestChangeMapOnFileEqualsInMemory: a change map held in a scratch file
// (regions above the in-memory size) gives the change.tif, byte for byte,
// and the patches of a map held in memory, in a single run and in a staged
// run's finish. Both paths run GDAL's own sieve over the whole map
// (GDALSieveFilter) and GDAL's polygonize on the same pixels; only where
// the pixels are kept differs, so they agree by construction. Checked on
// the demo pair and on noisy copies of the real Landsat 7 subset (many
// small patches of noise), the patches read back with GDAL's ogr2ogr as
// GeoJSON. (On maps larger than GDAL's block cache the pixels still agree,
// but a GeoTIFF's blocks may lie in another order in the file: GDAL writes
// them as its cache evicts them, which the scratch map's use of the cache
// moves.)
func TestChangeMapOnFileEqualsInMemory(t *testing.T) {
	testenv.NeedTool(t, "ogr2ogr", "gdal-bin")
	dir := t.TempDir()
	for _, name := range []string{"demo", "landsat"} {
		before, after := testPair(t, dir, name)
		o := pairchange.ChangeOptions{Before: before, After: after, SharedOptions: series.SharedOptions{MinArea: jobkit.MinArea{Px: 4}, Input: jobkit.Input{Tile: 64}}}
		if name == "landsat" {
			// Nothing changed between the copies: a low threshold flags
			// enough noise to leave patches of 4 pixels and more.
			o.Threshold = change.Threshold{Rule: change.RuleChiSq, Param: 0.9}
		}
		mem := o
		mem.Out = filepath.Join(dir, name+"-memory")
		want := jobtest.RunChange(t, jobtest.TestEnv, mem)
		if want.Patches == 0 {
			t.Fatalf("%s: no patches to compare", name)
		}
		file, staged := o, o
		file.Out, staged.Out = filepath.Join(dir, name+"-file"), filepath.Join(dir, name+"-staged")
		var got, gotStaged *changefolder.ChangeResult
		func() {
			defer pairchange.SetMemoryMapPixels(pairchange.SetMemoryMapPixels(0))
			got = jobtest.RunChange(t, jobtest.TestEnv, file)
			gotStaged = runStaged(t, jobtest.TestEnv, staged, 2)
		}()
		for _, c := range []struct {
			name, out string
			res       *changefolder.ChangeResult
		}{{name + ", single run", file.Out, got}, {name + ", staged finish", staged.Out, gotStaged}} {
			sameFolder(t, c.name, mem.Out, c.out, want, c.res)
			if !bytes.Equal(patchesJSON(t, mem.Out), patchesJSON(t, c.out)) {
				t.Errorf("%s: the patches on file differ from those in memory", c.name)
			}
			if _, err := os.Stat(filepath.Join(c.out, "change-map.tif")); err == nil {
				t.Errorf("%s: the scratch map was left in the folder", c.name)
			}
		}
	}
}

// testPair returns the paths of a pair of dates in dir: "demo", the demo
// scenario's pair, or "landsat", two noisy copies of the real Landsat 7
// subset (the test is skipped without it).
func testPair(t *testing.T, dir, name string) (before, after string) {
	t.Helper()
	if name == "demo" {
		demo := jobtest.ScenarioFiles(t, dir, 256, 7)
		return demo.Before, demo.After
	}
	jobtest.NeedLandsat(t)
	before, after = filepath.Join(dir, "a.tif"), filepath.Join(dir, "b.tif")
	jobtest.NoisyCopy(t, before, 1, 0)
	jobtest.NoisyCopy(t, after, 2, 3)
	return before, after
}

// patchesJSON is layer "changes" of a folder's changes.gpkg as GeoJSON,
// read by GDAL's ogr2ogr.
func patchesJSON(t *testing.T, dir string) []byte {
	t.Helper()
	out, err := exec.Command("ogr2ogr", "-f", "GeoJSON", "/vsistdout/", filepath.Join(dir, "changes.gpkg"), "changes").Output()
	if err != nil {
		t.Fatalf("ogr2ogr %s: %v", dir, err)
	}
	return out
}
