package main

import (
	"context"
	"fmt"
	"os"
	"path/filepath"
	"strings"

	"github.com/spf13/cobra"

	"bandfold/cmd/bandfold/internal/scenario"
	"bandfold/raster"
	"bandfold/tiles"
)

type demoOptions struct {
	dir       string
	size      int
	seed      uint64
	overwrite bool
}

func newDemoCommand(g *globals) *cobra.Command {
	o := &demoOptions{}
	cmd := &cobra.Command{
		Use:   "demo",
		Short: "Make the invented Vessel river scenario and run the whole job on it",
		Long: `demo writes an invented scenario: the Vessel river catchment, a fictional
place seen on two dates a year apart by an 8-band multispectral sensor at 10 m
(with a forest clearing, a growing reservoir and a burn scar between the
dates, and their truth mask), and by a 120-band hyperspectral sensor at 30 m.
It then runs bandfold's commands on it and lists where every output lies.`,
		Example: `  bandfold demo --dir demo-out
  bandfold demo --dir small --size 512`,
		Args: cobra.NoArgs,
		RunE: func(cmd *cobra.Command, _ []string) error {
			return runDemo(cmd.Context(), g, o)
		},
	}
	f := cmd.Flags()
	f.StringVar(&o.dir, "dir", "demo-out", "folder for the scenario and the results")
	f.IntVar(&o.size, "size", 2048, "side of the 10 m scenes in pixels")
	f.Uint64Var(&o.seed, "seed", 7, "seed of the invented scenario")
	f.BoolVar(&o.overwrite, "overwrite", false, "replace outputs left by an earlier run")
	cmd.AddCommand(newSynthCommand(g))
	return cmd
}

// demoFiles names the scenario's files in its folder.
type demoFiles struct {
	before, after, truth, hyper string
}

func (o *demoOptions) files() demoFiles {
	j := func(n string) string { return filepath.Join(o.dir, n) }
	return demoFiles{before: j("vessel-2023-06-14.tif"), after: j("vessel-2024-06-19.tif"),
		truth: j("vessel-truth.tif"), hyper: j("vessel-hyper.tif")}
}

// writeScenario renders the scenario's rasters tile by tile in parallel.
func writeScenario(ctx context.Context, g *globals, o *demoOptions) (demoFiles, *scenario.Catchment, error) {
	files := o.files()
	c, err := scenario.NewCatchment(o.size, o.size, o.seed)
	if err != nil {
		return files, nil, usageError{err}
	}
	if err := os.MkdirAll(o.dir, 0o755); err != nil {
		return files, nil, fmt.Errorf("demo folder %s: %w", o.dir, err)
	}
	wkt, err := raster.EPSG(c.EPSG())
	if err != nil {
		return files, nil, err
	}
	w, h := c.Size()
	ms := raster.Grid{Width: w, Height: h, GeoTransform: c.GeoTransform(), HasGeoTransform: true, Projection: wkt}
	nd := c.NoData()
	dates := c.Dates()
	grid := tiles.NewGrid(w, h, 256, 256)
	for date, path := range []string{files.before, files.after} {
		spec := raster.Spec{Grid: ms, Bands: scenario.MSBands, DataType: "UInt16", NoData: &nd,
			Descriptions: c.BandNames(), Overwrite: o.overwrite,
			Metadata: map[string]string{"ACQUISITION_DATE": dates[date], "SCENARIO": scenario.Name + " (invented demo data)"}}
		err := writeRaster(ctx, g, path, spec, grid, func(int) renderFunc {
			return func(t tiles.Tile, dst []float64) error {
				c.Multispectral(date, t.X, t.Y, t.W, t.H, dst)
				return nil
			}
		})
		if err != nil {
			return files, nil, err
		}
	}
	tnd := float64(scenario.TruthNoData)
	truthSpec := raster.Spec{Grid: ms, Bands: 1, DataType: "Byte", NoData: &tnd, Overwrite: o.overwrite,
		Descriptions: []string{"change truth (1 changed, 0 unchanged)"},
		Metadata:     map[string]string{"SCENARIO": scenario.Name + " (invented demo data)"}}
	err = writeRaster(ctx, g, files.truth, truthSpec, grid, func(int) renderFunc {
		var ids []uint8
		return func(t tiles.Tile, dst []float64) error {
			if cap(ids) < t.Pixels() {
				ids = make([]uint8, t.Pixels())
			}
			ids = ids[:t.Pixels()]
			c.Truth(t.X, t.Y, t.W, t.H, ids)
			for i, v := range ids {
				dst[i] = float64(v)
			}
			return nil
		}
	})
	if err != nil {
		return files, nil, err
	}
	hw, hh := c.HyperSize()
	hnd := c.HyperNoData()
	hyperSpec := raster.Spec{Grid: raster.Grid{Width: hw, Height: hh, GeoTransform: c.HyperGeoTransform(), HasGeoTransform: true, Projection: wkt},
		Bands: scenario.HyperBands, DataType: "Int16", NoData: &hnd, Descriptions: c.HyperBandNames(), Overwrite: o.overwrite,
		Metadata: map[string]string{"ACQUISITION_DATE": dates[1], "SCENARIO": scenario.Name + " (invented demo data)"}}
	err = writeRaster(ctx, g, files.hyper, hyperSpec, tiles.NewGrid(hw, hh, 256, 32), func(int) renderFunc {
		return func(t tiles.Tile, dst []float64) error {
			c.Hyperspectral(t.X, t.Y, t.W, t.H, dst)
			return nil
		}
	})
	return files, c, err
}

func runDemo(ctx context.Context, g *globals, o *demoOptions) error {
	files, c, err := writeScenario(ctx, g, o)
	if err != nil {
		return err
	}
	g.info("%s (invented): %dx%d pixels at 10 m, dates %s and %s", scenario.Name, o.size, o.size, c.Dates()[0], c.Dates()[1])
	for _, e := range c.Events() {
		g.info("  event %d: %s, %s -> %s, %d pixels (%.1f ha)", e.ID, e.Name, e.From, e.To, e.Area, float64(e.Area)*scenario.PixelSize*scenario.PixelSize/1e4)
	}

	outputs := []string{files.before, files.after, files.truth, files.hyper}
	step := func(name string, args ...string) error {
		g.info("\n$ bandfold %s", strings.Join(args, " "))
		sub := newRootCommand(&globals{stdout: g.stderr, stderr: g.stderr})
		if g.quiet {
			args = append(args, "--quiet")
		}
		args = append(args, "--workers", fmt.Sprint(g.workers))
		sub.SetArgs(args)
		sub.SetOut(g.stderr)
		sub.SetErr(g.stderr)
		if err := sub.ExecuteContext(ctx); err != nil {
			return fmt.Errorf("demo step %s: %w", name, err)
		}
		return nil
	}
	j := func(n string) string { return filepath.Join(o.dir, n) }
	ow := func(args ...string) []string {
		if o.overwrite {
			return append(args, "--overwrite")
		}
		return args
	}
	hyperBasis := j("vessel-hyper.basis.json")
	if err := step("learn hyperspectral", ow("learn", files.hyper, "--variance", "0.995", "--out", hyperBasis)...); err != nil {
		return err
	}
	outputs = append(outputs, hyperBasis)
	pairBasis := j("vessel-pair.basis.json")
	if err := step("learn multispectral pair", ow("learn", files.before, files.after, "--out", pairBasis)...); err != nil {
		return err
	}
	outputs = append(outputs, pairBasis)

	g.info("\noutputs:")
	for _, p := range outputs {
		g.info("  %s", p)
	}
	return nil
}
