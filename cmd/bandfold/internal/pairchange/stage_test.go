package pairchange_test

import (
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"testing"

	"bandfold/cmd/bandfold/internal/changefolder"
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/jobtest"
	"bandfold/cmd/bandfold/internal/pairchange"
	"bandfold/cmd/bandfold/internal/series"
	"bandfold/raster"
	"bandfold/tiles"
	"bandfold/tiles/testenv"
)

// runStaged runs a staged change: n scan shards, the fit, n map shards
// and the finish, each with env.
func runStaged(t *testing.T, env jobkit.Env, o pairchange.ChangeOptions, n int) *changefolder.ChangeResult {
	t.Helper()
	jobtest.RunStages(t, n, func(st series.Staging) error {
		s := o
		s.Staging = st
		_, err := pairchange.ChangeStage(t.Context(), env, s)
		return err
	})
	o.Stage = series.StageFinish
	return jobtest.RunChange(t, env, o)
}

// sameFolder compares a staged run's change folder with a single run's
// (jobtest.SameFolder): change.tif, magnitude.tif, preview.png, and
// pvalue.tif and
// differences.tif where the single run wrote them, byte for byte, the
// summaries, the patches and the mapped area.
func sameFolder(t *testing.T, name, single, staged string, a, b *changefolder.ChangeResult) {
	t.Helper()
	files := []string{"change.tif", "magnitude.tif", "preview.png"}
	for _, f := range []string{"pvalue.tif", "differences.tif"} {
		if _, err := os.Stat(filepath.Join(single, f)); err == nil {
			files = append(files, f)
		}
	}
	jobtest.SameFolder(t, name, single, staged, files, a, b)
	if a.Patches != b.Patches || a.ChangedPixels != b.ChangedPixels || !reflect.DeepEqual(a.ChangedAreaM2, b.ChangedAreaM2) {
		t.Errorf("%s: %d patches, %d pixels changed; the single run's %d, %d", name, b.Patches, b.ChangedPixels, a.Patches, a.ChangedPixels)
	}
}

// TestStagedChangeEqualsSingleRun: on the demo pair and on a pair of
// noisy copies of the real Landsat 7 subset, a staged run of 1, 2, 3 and 7
// shards writes what a single run writes, --pvalues and --differences
// included, with 1 or 2 workers (known by construction: exact sums, a
// mergeable sample and the same fit).
func TestStagedChangeEqualsSingleRun(t *testing.T) {
	dir := t.TempDir()
	demo := jobtest.ScenarioFiles(t, dir, 256, 7)
	pairs := []struct {
		name, before, after string
		landsat             bool
	}{
		{"demo", demo.Before, demo.After, false},
		{"landsat", filepath.Join(dir, "a.tif"), filepath.Join(dir, "b.tif"), true},
	}
	for _, pr := range pairs {
		if pr.landsat {
			jobtest.NeedLandsat(t)
			jobtest.NoisyCopy(t, pr.before, 1, 0)
			jobtest.NoisyCopy(t, pr.after, 2, 3)
		}
		o := pairchange.ChangeOptions{Before: pr.before, After: pr.after, PValues: true, Differences: true, SharedOptions: series.SharedOptions{MinArea: jobkit.MinArea{Px: 4}, Input: jobkit.Input{Tile: 64}}}
		single := o
		single.Out = filepath.Join(dir, pr.name+"-single")
		want := jobtest.RunChange(t, jobtest.TestEnv, single)
		for _, c := range jobtest.ShardCases {
			name := fmt.Sprintf("%s, %d shards, %d workers", pr.name, c.Shards, c.Workers)
			s := o
			s.Out = filepath.Join(dir, fmt.Sprintf("%s-%d-%d", pr.name, c.Shards, c.Workers))
			got := runStaged(t, jobtest.WorkersEnv(c.Workers), s, c.Shards)
			sameFolder(t, name, single.Out, s.Out, want, got)
			if _, err := os.Stat(series.WorkArea(s.Out)); err != nil {
				t.Errorf("%s: no work area: %v", name, err)
			}
		}
	}
}

// TestStagedChangeRefusals: the stages refuse what cannot make one whole
// run, in one line naming the file and the problem, writing nothing into
// the output folder.
func TestStagedChangeRefusals(t *testing.T) {
	dir := t.TempDir()
	demo := jobtest.ScenarioFiles(t, dir, 128, 3)
	after := filepath.Join(dir, "after.tif")
	jobtest.CopyFile(t, demo.After, after)
	base := pairchange.ChangeOptions{Before: demo.Before, After: after, SharedOptions: series.SharedOptions{Input: jobkit.Input{Tile: 32}}}
	stage := func(o pairchange.ChangeOptions, st string, i, n int) error {
		o.Stage, o.Shard = st, jobkit.Shard{I: i, N: n}
		if st == series.StageFit {
			o.Shard = jobkit.Shard{}
		}
		if st == series.StageFinish {
			_, err := pairchange.Change(t.Context(), jobtest.TestEnv, o)
			return err
		}
		_, err := pairchange.ChangeStage(t.Context(), jobtest.TestEnv, o)
		return err
	}
	must := func(err error) { jobtest.Must(t, err) }
	tests := []struct {
		name  string
		run   func(o pairchange.ChangeOptions) error
		usage bool
		want  []string
	}{
		{"map before fit", func(o pairchange.ChangeOptions) error {
			must(stage(o, "scan", 0, 1))
			return stage(o, "map", 0, 1)
		}, true, []string{"model.gob", "run --stage fit"}},
		{"a missing scan shard", func(o pairchange.ChangeOptions) error {
			must(stage(o, "scan", 0, 2))
			return stage(o, "fit", 0, 0)
		}, false, []string{"shard 1/2 is missing"}},
		{"a mixed set", func(o pairchange.ChangeOptions) error {
			must(stage(o, "scan", 0, 2))
			must(stage(o, "scan", 1, 2))
			must(stage(o, "scan", 0, 3))
			return stage(o, "fit", 0, 0)
		}, false, []string{"scan-0-of-3.gob is shard 0/3, of another split"}},
		{"a shard run twice", func(o pairchange.ChangeOptions) error {
			must(stage(o, "scan", 0, 1))
			return stage(o, "scan", 0, 1)
		}, false, []string{"scan-0-of-1.gob", "exists"}},
		{"other options", func(o pairchange.ChangeOptions) error {
			must(stage(o, "scan", 0, 1))
			o.Sample = 500
			return stage(o, "fit", 0, 0)
		}, true, []string{"scan-0-of-1.gob", "other options", "Sample"}},
		{"another scene", func(o pairchange.ChangeOptions) error {
			must(stage(o, "scan", 0, 1))
			appendByte(t, after) // another file now, of another size
			defer jobtest.CopyFile(t, demo.After, after)
			return stage(o, "fit", 0, 0)
		}, false, []string{"scan-0-of-1.gob", "other inputs"}},
		{"a missing map shard", func(o pairchange.ChangeOptions) error {
			must(stage(o, "scan", 0, 1))
			must(stage(o, "fit", 0, 0))
			must(stage(o, "map", 1, 2))
			return stage(o, "finish", 0, 0)
		}, false, []string{"shard 0/2 is missing"}},
		{"a piece of an earlier fit", func(o pairchange.ChangeOptions) error {
			must(stage(o, "scan", 0, 1))
			must(stage(o, "fit", 0, 0))
			must(stage(o, "map", 0, 1))
			appendByte(t, series.StagePath(o.Out, series.KindModel, jobkit.Shard{})) // as if fitted again on other partials
			return stage(o, "finish", 0, 0)
		}, false, []string{"map-0-of-1.gob", "another model"}},
		{"a shard of fit", func(o pairchange.ChangeOptions) error {
			o.Stage, o.Shard = "fit", jobkit.Shard{I: 1, N: 2}
			_, err := pairchange.ChangeStage(t.Context(), jobtest.TestEnv, o)
			return err
		}, true, []string{"--shard 1/2 applies to --stage scan and map only"}},
	}
	var cases []jobtest.Refusal
	for _, tc := range tests {
		cases = append(cases, jobtest.Refusal{Name: tc.name, Usage: tc.usage, Want: tc.want, Run: func(out string) error {
			o := base
			o.Out = out
			return tc.run(o)
		}})
	}
	jobtest.CheckRefusals(t, dir, cases)
}

// TestStagedPatchAcrossShardEdges: a block of change across the corner of
// four tiles, which 2 and 3 shards map apart, is one polygon in the
// staged run's changes.gpkg, read back with GDAL's ogr2ogr: the block's
// 256 pixels (with whatever noise flags touch it, the same in every run)
// and the single run's ground area. Known by construction: the block is
// the only change, 400 counts in every band against noise of a few.
func TestStagedPatchAcrossShardEdges(t *testing.T) {
	jobtest.NeedLandsat(t)
	dir := t.TempDir()
	a, b := filepath.Join(dir, "a.tif"), filepath.Join(dir, "b.tif")
	jobtest.NoisyCopy(t, a, 1, 0)
	unchanged := filepath.Join(dir, "unchanged.tif")
	jobtest.NoisyCopy(t, unchanged, 2, 0)
	block := tiles.Tile{X: 120, Y: 120, W: 16, H: 16} // across the tile edges at 128
	g := addBlock(t, unchanged, b, block, 400)
	o := pairchange.ChangeOptions{Before: a, After: b, SharedOptions: series.SharedOptions{MinArea: jobkit.MinArea{Px: 4}, Input: jobkit.Input{Tile: 64}}}
	single := o
	single.Out = filepath.Join(dir, "single")
	jobtest.RunChange(t, jobtest.TestEnv, single)
	want := blockPatch(t, single.Out, g, block)
	px := want.Area / math.Abs(g.GeoTransform[1]*g.GeoTransform[5])
	if px < 256 || px > 256+8 {
		t.Errorf("the single run's patch over the block has %.1f pixels, want the block's 256 and at most a few flagged beside it", px)
	}
	for _, n := range []int{2, 3} {
		s := o
		s.Out = filepath.Join(dir, fmt.Sprintf("staged-%d", n))
		runStaged(t, jobtest.TestEnv, s, n)
		got := blockPatch(t, s.Out, g, block)
		if got.Area != want.Area || *got.Properties["area_m2"] != *want.Properties["area_m2"] {
			t.Errorf("%d shards: the block's patch is %v m2 (planar %v), the single run's %v (%v)", n, *got.Properties["area_m2"], got.Area, *want.Properties["area_m2"], want.Area)
		}
	}
}

// addBlock writes the image at src with v added to every band over the
// block to dst and returns the image's grid.
func addBlock(t *testing.T, src, dst string, block tiles.Tile, v float64) raster.Grid {
	s, buf, _ := jobtest.ReadImage(t, src, tiles.Tile{})
	p := s.Len()
	for y := block.Y; y < block.Y+block.H; y++ {
		for x := block.X; x < block.X+block.W; x++ {
			for b := range p {
				buf[(y*s.Width+x)*p+b] += v
			}
		}
	}
	jobtest.WriteRasterFile(t, dst, raster.Spec{Grid: s.Grid, Bands: p, DataType: "Float32"}, buf)
	return s.Grid
}

// blockPatch returns the one patch of a change folder over the block,
// failing unless there is exactly one.
func blockPatch(t *testing.T, out string, g raster.Grid, block tiles.Tile) testenv.Polygon {
	t.Helper()
	gt := g.GeoTransform
	cx := gt[0] + (float64(block.X)+float64(block.W)/2)*gt[1]
	cy := gt[3] + (float64(block.Y)+float64(block.H)/2)*gt[5]
	polys, _ := testenv.ReadPolygons(t, filepath.Join(out, "changes.gpkg"), "changes")
	var over []testenv.Polygon
	for _, p := range polys {
		if p.Box[0] < cx && cx < p.Box[2] && p.Box[1] < cy && cy < p.Box[3] {
			over = append(over, p)
		}
	}
	if len(over) != 1 {
		t.Fatalf("%s: %d patches over the block, want 1", out, len(over))
	}
	return over[0]
}

// appendByte makes path another file, still readable.
func appendByte(t *testing.T, path string) {
	f, err := os.OpenFile(path, os.O_APPEND|os.O_WRONLY, 0)
	if err == nil {
		_, err = f.Write([]byte{0})
		err = errors.Join(err, f.Close())
	}
	if err != nil {
		t.Fatal(err)
	}
}
