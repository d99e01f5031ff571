package demo

import (
	"context"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"sort"
	"strings"

	"bandfold/cmd/bandfold/internal/changefolder"
	"bandfold/cmd/bandfold/internal/fold"
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/learn"
	"bandfold/cmd/bandfold/internal/pairchange"
	"bandfold/cmd/bandfold/internal/scenario"
	"bandfold/cmd/bandfold/internal/series"
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
	HyperLearn  *learn.LearnResult
	HyperFold   *fold.FoldScene
	HyperUnfold *fold.UnfoldResult
	// Hyper compares PCA and MNF denoising of the cube (demohyper.go).
	Hyper     *DemoHyper
	PairLearn *learn.LearnResult
	Folds     [2]*fold.FoldScene
	Change    *changefolder.ChangeResult
	// Timeline is the five-date series at half the size (timelinedemo.go).
	Timeline *DemoTimeline
	// Outputs lists every file in Dir.
	Outputs []string
}

// DemoFiles names the scenario's files.
type DemoFiles struct {
	Before, After, Truth, Hyper string
}

func (o *DemoOptions) Files() DemoFiles {
	j := func(n string) string { return filepath.Join(o.Dir, n) }
	return DemoFiles{Before: j("scenario/vessel-2023-06-14.tif"), After: j("scenario/vessel-2024-06-19.tif"),
		Truth: j("scenario/vessel-truth.tif"), Hyper: j("scenario/vessel-hyper.tif")}
}

// Demo writes the invented scenario and runs the whole job on it:
// compression of the hyperspectral cube, the change map between the two
// multispectral dates scored against the scenario's truth, and the
// timeline of its five-date series with each event's date found.
func Demo(ctx context.Context, env jobkit.Env, o DemoOptions) (_ *DemoResult, err error) {
	defer func() { err = jobkit.Classify(err) }()
	res := &DemoResult{Files: o.Files()}
	c, err := WriteScenario(ctx, env, &o)
	if err != nil {
		return nil, err
	}
	res.Scenario = c
	f := res.Files
	j := func(n string) string { return filepath.Join(o.Dir, n) }
	if res.HyperLearn, err = learn.Learn(ctx, env, learn.LearnOptions{Scenes: []string{f.Hyper}, Variance: 0.995, Out: j("hyper.basis.json"), Overwrite: o.Overwrite}); err != nil {
		return nil, fmt.Errorf("demo learn: %w", err)
	}
	if _, err := learn.Inspect(ctx, env, learn.InspectOptions{Basis: j("hyper.basis.json"), Plots: j("hyper-plots"), Overwrite: o.Overwrite}); err != nil {
		return nil, fmt.Errorf("demo inspect: %w", err)
	}
	if res.HyperFold, err = fold.Fold(ctx, env, fold.FoldOptions{Scenes: []string{f.Hyper}, Basis: j("hyper.basis.json"), Type: "int16",
		Out: j("hyper.components.tif"), Preview: j("hyper.components.png"), Overwrite: o.Overwrite}); err != nil {
		return nil, fmt.Errorf("demo fold: %w", err)
	}
	if res.HyperUnfold, err = fold.Unfold(ctx, env, fold.UnfoldOptions{Components: j("hyper.components.tif"), Basis: j("hyper.basis.json"),
		Out: j("hyper.restored.tif"), Compare: f.Hyper, Overwrite: o.Overwrite}); err != nil {
		return nil, fmt.Errorf("demo unfold: %w", err)
	}
	if res.Hyper, err = RunHyperDemo(ctx, env, &o, c); err != nil {
		return nil, err
	}
	if res.PairLearn, err = learn.Learn(ctx, env, learn.LearnOptions{Scenes: []string{f.Before, f.After}, Variance: 0.99, Out: j("pair.basis.json"), Overwrite: o.Overwrite}); err != nil {
		return nil, fmt.Errorf("demo learn: %w", err)
	}
	if _, err := learn.Inspect(ctx, env, learn.InspectOptions{Basis: j("pair.basis.json"), Plots: j("pair-plots"), Overwrite: o.Overwrite}); err != nil {
		return nil, fmt.Errorf("demo inspect: %w", err)
	}
	for i, in := range []string{f.Before, f.After} {
		name := []string{"before", "after"}[i]
		if res.Folds[i], err = fold.Fold(ctx, env, fold.FoldOptions{Scenes: []string{in}, Basis: j("pair.basis.json"),
			Out: j(name + ".components.tif"), Overwrite: o.Overwrite}); err != nil {
			return nil, fmt.Errorf("demo fold: %w", err)
		}
	}
	thr, err := change.ParseThreshold(change.DefaultThreshold)
	if err != nil {
		return nil, err
	}
	if res.Change, err = pairchange.Change(ctx, env, pairchange.ChangeOptions{Before: f.Before, After: f.After, Reference: f.Truth,
		PreviewBands: []int{3, 2, 1}, SharedOptions: series.SharedOptions{Out: j("change"),
			Threshold: thr, MinArea: jobkit.MinArea{Px: 4}, Overwrite: o.Overwrite}}); err != nil {
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

// WriteScenario renders the scenario's rasters tile by tile in parallel.
func WriteScenario(ctx context.Context, env jobkit.Env, o *DemoOptions) (*scenario.Catchment, error) {
	files := o.Files()
	c, err := scenario.NewCatchment(o.Size, o.Size, o.Seed)
	if err != nil {
		return nil, jobkit.Usagef("--size %d: %v", o.Size, strings.TrimPrefix(err.Error(), "scenario: "))
	}
	if err := os.MkdirAll(filepath.Join(o.Dir, "scenario"), 0o755); err != nil {
		return nil, fmt.Errorf("demo folder %s: %w", o.Dir, jobkit.UnwrapPath(err))
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
		err := jobkit.WriteRaster(ctx, env, path, spec, grid, func(int) jobkit.RenderFunc {
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
	err = jobkit.WriteRaster(ctx, env, files.Truth, truthSpec, grid, truthRender(c.Truth))
	if err != nil {
		return nil, err
	}
	hw, hh := c.HyperSize()
	hnd := c.HyperNoData()
	hyperSpec := raster.Spec{Grid: raster.Grid{Width: hw, Height: hh, GeoTransform: c.HyperGeoTransform(), HasGeoTransform: true, Projection: wkt},
		Bands: scenario.HyperBands, DataType: "Int16", NoData: &hnd, Descriptions: c.HyperBandNames(), Overwrite: o.Overwrite,
		Metadata: with(map[string]string{"ACQUISITION_DATE": dates[1]}), Wavelengths: hyperWavelengths(c)}
	err = jobkit.WriteRaster(ctx, env, files.Hyper, hyperSpec, tiles.NewGrid(hw, hh, 256, 32), func(int) jobkit.RenderFunc {
		return func(t tiles.Tile, dst []float64) error {
			c.Hyperspectral(t.X, t.Y, t.W, t.H, dst)
			return nil
		}
	})
	return c, err
}

// InventedNote is the demo report's reminder of what its scores mean.
const InventedNote = "these scores are on an invented scene whose change is known exactly and whose dates differ only by invented noise: real scenes (other sensors, illumination, phenology, misregistration) score lower"
