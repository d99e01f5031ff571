package job

import (
	"context"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"sort"
	"strings"

	"bandfold/cmd/bandfold/internal/scenario"
	"bandfold/raster"
	"bandfold/tiles"
	"bandfold/transform/change"
)

// DemoOptions are the options of Demo.
type DemoOptions struct {
	// Dir is the folder for the scenario and the results.
	Dir string
	// Size is the side of the 10 m scenes in pixels.
	Size      int
	Seed      uint64
	Overwrite bool
}

// DemoResult is everything the demo ran, for its report.
type DemoResult struct {
	Scenario    *scenario.Catchment
	Files       DemoFiles
	HyperLearn  *LearnResult
	HyperFold   *FoldScene
	HyperUnfold *UnfoldResult
	// Hyper compares PCA and MNF denoising of the cube (demohyper.go).
	Hyper     *DemoHyper
	PairLearn *LearnResult
	Folds     [2]*FoldScene
	Change    *ChangeResult
	// Timeline is the five-date series at half the size (timelinedemo.go).
	Timeline *DemoTimeline
	// Outputs lists every file in Dir.
	Outputs []string
}

// DemoFiles names the scenario's files.
type DemoFiles struct {
	Before, After, Truth, Hyper string
}

func (o *DemoOptions) files() DemoFiles {
	j := func(n string) string { return filepath.Join(o.Dir, n) }
	return DemoFiles{Before: j("scenario/vessel-2023-06-14.tif"), After: j("scenario/vessel-2024-06-19.tif"),
		Truth: j("scenario/vessel-truth.tif"), Hyper: j("scenario/vessel-hyper.tif")}
}

// Demo writes the invented scenario and runs the whole job on it:
// compression of the hyperspectral cube, the change map between the two
// multispectral dates scored against the scenario's truth, and the
// timeline of its five-date series with each event's date found.
func Demo(ctx context.Context, env Env, o DemoOptions) (_ *DemoResult, err error) {
	defer func() { err = classify(err) }()
	res := &DemoResult{Files: o.files()}
	c, err := writeScenario(ctx, env, &o)
	if err != nil {
		return nil, err
	}
	res.Scenario = c
	f := res.Files
	j := func(n string) string { return filepath.Join(o.Dir, n) }
	if res.HyperLearn, err = Learn(ctx, env, LearnOptions{Scenes: []string{f.Hyper}, Variance: 0.995, Out: j("hyper.basis.json"), Overwrite: o.Overwrite}); err != nil {
		return nil, fmt.Errorf("demo learn: %w", err)
	}
	if _, err := Inspect(ctx, env, InspectOptions{Basis: j("hyper.basis.json"), Plots: j("hyper-plots"), Overwrite: o.Overwrite}); err != nil {
		return nil, fmt.Errorf("demo inspect: %w", err)
	}
	if res.HyperFold, err = Fold(ctx, env, FoldOptions{Scenes: []string{f.Hyper}, Basis: j("hyper.basis.json"), Type: "int16",
		Out: j("hyper.components.tif"), Preview: j("hyper.components.png"), Overwrite: o.Overwrite}); err != nil {
		return nil, fmt.Errorf("demo fold: %w", err)
	}
	if res.HyperUnfold, err = Unfold(ctx, env, UnfoldOptions{Components: j("hyper.components.tif"), Basis: j("hyper.basis.json"),
		Out: j("hyper.restored.tif"), Compare: f.Hyper, Overwrite: o.Overwrite}); err != nil {
		return nil, fmt.Errorf("demo unfold: %w", err)
	}
	if res.Hyper, err = runHyperDemo(ctx, env, &o, c); err != nil {
		return nil, err
	}
	if res.PairLearn, err = Learn(ctx, env, LearnOptions{Scenes: []string{f.Before, f.After}, Variance: 0.99, Out: j("pair.basis.json"), Overwrite: o.Overwrite}); err != nil {
		return nil, fmt.Errorf("demo learn: %w", err)
	}
	if _, err := Inspect(ctx, env, InspectOptions{Basis: j("pair.basis.json"), Plots: j("pair-plots"), Overwrite: o.Overwrite}); err != nil {
		return nil, fmt.Errorf("demo inspect: %w", err)
	}
	for i, in := range []string{f.Before, f.After} {
		name := []string{"before", "after"}[i]
		if res.Folds[i], err = Fold(ctx, env, FoldOptions{Scenes: []string{in}, Basis: j("pair.basis.json"),
			Out: j(name + ".components.tif"), Overwrite: o.Overwrite}); err != nil {
			return nil, fmt.Errorf("demo fold: %w", err)
		}
	}
	thr, err := change.ParseThreshold(change.DefaultThreshold)
	if err != nil {
		return nil, err
	}
	if res.Change, err = Change(ctx, env, ChangeOptions{Before: f.Before, After: f.After, Out: j("change"), Reference: f.Truth,
		PreviewBands: []int{3, 2, 1}, Threshold: thr, MinArea: MinArea{Px: 4}, Overwrite: o.Overwrite}); err != nil {
		return nil, fmt.Errorf("demo change: %w", err)
	}
	if res.Timeline, err = demoTimeline(ctx, env, &o); err != nil {
		return nil, err
	}
	err = filepath.WalkDir(o.Dir, func(p string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		if !d.IsDir() {
			res.Outputs = append(res.Outputs, p)
		}
		return nil
	})
	sort.Strings(res.Outputs)
	return res, err
}

// writeScenario renders the scenario's rasters tile by tile in parallel.
func writeScenario(ctx context.Context, env Env, o *DemoOptions) (*scenario.Catchment, error) {
	files := o.files()
	c, err := scenario.NewCatchment(o.Size, o.Size, o.Seed)
	if err != nil {
		return nil, Usagef("--size %d: %v", o.Size, strings.TrimPrefix(err.Error(), "scenario: "))
	}
	if err := os.MkdirAll(filepath.Join(o.Dir, "scenario"), 0o755); err != nil {
		return nil, fmt.Errorf("demo folder %s: %w", o.Dir, unwrapPath(err))
	}
	wkt, err := raster.FromPROJ(c.CRS())
	if err != nil {
		return nil, err
	}
	w, h := c.Size()
	ms := raster.Grid{Width: w, Height: h, GeoTransform: c.GeoTransform(), HasGeoTransform: true, Projection: wkt}
	nd := c.NoData()
	dates := c.Dates()
	tag := map[string]string{"SCENARIO": scenario.Name + " (invented demo data)", "SCENARIO_LOCATION": scenario.Location}
	with := func(extra map[string]string) map[string]string {
		out := map[string]string{}
		for k, v := range tag {
			out[k] = v
		}
		for k, v := range extra {
			out[k] = v
		}
		return out
	}
	grid := tiles.NewGrid(w, h, 256, 256)
	for date, path := range []string{files.Before, files.After} {
		spec := raster.Spec{Grid: ms, Bands: scenario.MSBands, DataType: "UInt16", NoData: &nd,
			Descriptions: c.BandNames(), Overwrite: o.Overwrite,
			Metadata: with(map[string]string{"ACQUISITION_DATE": dates[date]})}
		err := writeRaster(ctx, env, path, spec, grid, func(int) renderFunc {
			return func(t tiles.Tile, dst []float64) error {
				c.Multispectral(date, t.X, t.Y, t.W, t.H, dst)
				return nil
			}
		})
		if err != nil {
			return nil, err
		}
	}
	tnd := float64(scenario.TruthNoData)
	truthSpec := raster.Spec{Grid: ms, Bands: 1, DataType: "Byte", NoData: &tnd, Overwrite: o.Overwrite,
		Descriptions: []string{"change truth (1 changed, 0 unchanged)"}, Metadata: with(nil)}
	err = writeRaster(ctx, env, files.Truth, truthSpec, grid, truthRender(c.Truth))
	if err != nil {
		return nil, err
	}
	hw, hh := c.HyperSize()
	hnd := c.HyperNoData()
	hyperSpec := raster.Spec{Grid: raster.Grid{Width: hw, Height: hh, GeoTransform: c.HyperGeoTransform(), HasGeoTransform: true, Projection: wkt},
		Bands: scenario.HyperBands, DataType: "Int16", NoData: &hnd, Descriptions: c.HyperBandNames(), Overwrite: o.Overwrite,
		Metadata: with(map[string]string{"ACQUISITION_DATE": dates[1]}), BandMetadata: hyperBandMetadata(c)}
	err = writeRaster(ctx, env, files.Hyper, hyperSpec, tiles.NewGrid(hw, hh, 256, 32), func(int) renderFunc {
		return func(t tiles.Tile, dst []float64) error {
			c.Hyperspectral(t.X, t.Y, t.W, t.H, dst)
			return nil
		}
	})
	return c, err
}
