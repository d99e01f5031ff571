package series_test

import (
	"encoding/json"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"bandfold/cmd/bandfold/internal/demo"
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/jobtest"
	"bandfold/cmd/bandfold/internal/pairchange"
	"bandfold/cmd/bandfold/internal/series"
	"bandfold/cmd/bandfold/internal/timeline"
	"bandfold/tiles"
	"bandfold/tiles/testenv"
)

// setIntegerKernel sets jobkit.IntegerKernel for the rest of the test.
func setIntegerKernel(t *testing.T, on bool) {
	old := jobkit.IntegerKernel
	jobkit.IntegerKernel = on
	t.Cleanup(func() { jobkit.IntegerKernel = old })
}

// landsatBands joins band files of a Level-1 product of make testdata.
func landsatBands(t *testing.T, product string, bands ...string) string {
	var paths []string
	for _, b := range bands {
		p := filepath.Join("../../../../testdata/external/landsat", product+"_B"+b+".TIF")
		testenv.NeedFile(t, p, "make testdata")
		paths = append(paths, p)
	}
	return strings.Join(paths, ",")
}

// sameOutputs fails unless the folders got and want hold the same files,
// the same JSON documents once the folders' names are replaced, and the
// same raster values bit for bit (NaN included), valid or not.
func sameOutputs(t *testing.T, name, got, want string, gotRes, wantRes any) {
	t.Helper()
	js := func(res any, dir string) string {
		b, err := json.Marshal(res)
		if err != nil {
			t.Fatal(err)
		}
		return strings.ReplaceAll(string(b), dir, "OUT")
	}
	if g, w := js(gotRes, got), js(wantRes, want); g != w {
		t.Errorf("%s: result\n%s\nwant (float64 path)\n%s", name, g, w)
	}
	files, err := filepath.Glob(filepath.Join(want, "*.tif"))
	if err != nil || len(files) == 0 {
		t.Fatalf("%s: no rasters in %s (%v)", name, want, err)
	}
	for _, f := range files {
		g := filepath.Join(got, filepath.Base(f))
		if _, err := os.Stat(g); err != nil {
			t.Errorf("%s: %v", name, err)
			continue
		}
		_, gx, gv := jobtest.ReadImage(t, g, tiles.Tile{})
		_, wx, wv := jobtest.ReadImage(t, f, tiles.Tile{})
		if len(gx) != len(wx) {
			t.Errorf("%s: %s holds %d values, the float64 path's %d", name, filepath.Base(f), len(gx), len(wx))
			continue
		}
		for i := range gx {
			if math.Float64bits(gx[i]) != math.Float64bits(wx[i]) || gv[i/(len(gx)/len(gv))] != wv[i/(len(wx)/len(wv))] {
				t.Errorf("%s: %s value %d is %v, the float64 path's %v", name, filepath.Base(f), i, gx[i], wx[i])
				break
			}
		}
	}
}

// TestIntegerKernelGivesTheSameChange: change and timeline on dates of
// integer bands give the same results and rasters bit for bit whether the
// sample pass sums each date with the integer kernel and the map pass
// reads int16 tiles ahead and scores them converted a chunk at a time
// (jobkit.IntegerKernel), or both take the float64 path at the same
// tiling (areas are summed tile by tile), for 1 to 3 workers, with tiles
// of 37 pixels and block-aligned ones. Known by
// construction: the same values, and the same exact integer sums
// (bands.NewExactAccumulator), reach every later step. The dates: the
// invented scenario's UInt16 pair with nodata; the real Landsat 7 (Byte)
// and Landsat 8 (Int16, nodata) Level-1 band files, matched by
// wavelength; a timeline of three invented UInt16 dates.
func TestIntegerKernelGivesTheSameChange(t *testing.T) {
	dir := t.TempDir()
	files := jobtest.ScenarioFiles(t, filepath.Join(dir, "scenario"), 96, 3)
	l7 := landsatBands(t, "LE07_L1TP_195025_20010730_20170204_01_T1", "1", "2", "3", "4", "5", "7")
	l8 := landsatBands(t, "LC08_L1TP_195025_20130707_20170503_01_T1", "2", "3", "4", "5", "6", "7")
	var dates []string
	for i := range 3 {
		f := filepath.Join(dir, fmt.Sprintf("date-201%d-07-01.tif", i))
		if _, err := demo.Synth(t.Context(), jobtest.TestEnv, demo.SynthOptions{Bands: 5, Width: 90, Height: 70, Type: "uint16",
			Block: 32, Interleave: "pixel", Out: f, Seed: uint64(20 + i)}); err != nil {
			t.Fatal(err)
		}
		dates = append(dates, f)
	}
	n := 0
	out := func() string { n++; return filepath.Join(dir, fmt.Sprintf("out%d", n)) }
	for _, pair := range []struct {
		name          string
		before, after string
	}{{"scenario", files.Before, files.After}, {"Landsat 7 and 8", l7, l8}} {
		change := func(integer bool, workers, tile int) (string, any) {
			setIntegerKernel(t, integer)
			o := pairchange.ChangeOptions{Before: pair.before, After: pair.after, SharedOptions: series.SharedOptions{Input: jobkit.Input{Tile: tile}, Out: out()}}
			return o.Out, jobtest.RunChange(t, jobtest.WorkersEnv(workers), o)
		}
		for _, tile := range []int{0, 37} {
			wantDir, want := change(false, 2, tile)
			for _, workers := range []int{1, 2, 3} {
				gotDir, got := change(true, workers, tile)
				sameOutputs(t, fmt.Sprintf("change on %s, %d workers, tile %d", pair.name, workers, tile), gotDir, wantDir, got, want)
			}
		}
	}
	tl := func(integer bool, workers, tile int) (string, any) {
		setIntegerKernel(t, integer)
		o := timeline.TimelineOptions{Scenes: dates, SharedOptions: series.SharedOptions{Input: jobkit.Input{Tile: tile}, Out: out()}}
		res, err := timeline.Timeline(t.Context(), jobtest.WorkersEnv(workers), o)
		if err != nil {
			t.Fatal(err)
		}
		return o.Out, res
	}
	for _, tile := range []int{0, 37} {
		wantDir, want := tl(false, 2, tile)
		for _, workers := range []int{1, 3} {
			gotDir, got := tl(true, workers, tile)
			sameOutputs(t, fmt.Sprintf("timeline, %d workers, tile %d", workers, tile), gotDir, wantDir, got, want)
		}
	}
}
