package main

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"io/fs"
	"math"
	"os"
	"path/filepath"
	"sort"
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
	return demoFiles{before: j("scenario/vessel-2023-06-14.tif"), after: j("scenario/vessel-2024-06-19.tif"),
		truth: j("scenario/vessel-truth.tif"), hyper: j("scenario/vessel-hyper.tif")}
}

// writeScenario renders the scenario's rasters tile by tile in parallel.
func writeScenario(ctx context.Context, g *globals, o *demoOptions) (demoFiles, *scenario.Catchment, error) {
	files := o.files()
	c, err := scenario.NewCatchment(o.size, o.size, o.seed)
	if err != nil {
		return files, nil, usageError{err}
	}
	if err := os.MkdirAll(filepath.Join(o.dir, "scenario"), 0o755); err != nil {
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

	j := func(n string) string { return filepath.Join(o.dir, n) }
	rep := &demoReport{}
	// step runs one bandfold command line in-process, its human text on
	// our stderr, and decodes its --json summary into v.
	step := func(v any, args ...string) error {
		g.info("\n$ bandfold %s", strings.Join(args, " "))
		var out bytes.Buffer
		sub := &globals{stdout: &out, stderr: g.stderr}
		root := newRootCommand(sub)
		full := append(args, "--json", "--workers", fmt.Sprint(g.workers))
		if g.quiet {
			full = append(full, "--quiet")
		}
		if o.overwrite && args[0] != "inspect" {
			full = append(full, "--overwrite")
		}
		root.SetArgs(full)
		root.SetOut(g.stderr)
		root.SetErr(g.stderr)
		if err := root.ExecuteContext(ctx); err != nil {
			return fmt.Errorf("demo step %q: %w", args[0], err)
		}
		if v != nil {
			lines := strings.Split(strings.TrimSpace(out.String()), "\n")
			return json.Unmarshal([]byte(lines[len(lines)-1]), v)
		}
		return nil
	}
	var hyperLearn, pairLearn basisSummary
	var hyperFold foldResult
	var hyperUnfold unfoldSummary
	var folds [2]foldResult
	var chg changeSummary
	steps := []struct {
		v    any
		args []string
	}{
		{&hyperLearn, []string{"learn", files.hyper, "--variance", "0.995", "--out", j("hyper.basis.json")}},
		{nil, []string{"inspect", j("hyper.basis.json"), "--plots", j("hyper-plots")}},
		{&hyperFold, []string{"fold", files.hyper, "--basis", j("hyper.basis.json"), "--type", "int16", "--out", j("hyper.components.tif"), "--preview", j("hyper.components.png")}},
		{&hyperUnfold, []string{"unfold", j("hyper.components.tif"), "--basis", j("hyper.basis.json"), "--out", j("hyper.restored.tif"), "--compare", files.hyper}},
		{&pairLearn, []string{"learn", files.before, files.after, "--out", j("pair.basis.json")}},
		{nil, []string{"inspect", j("pair.basis.json"), "--plots", j("pair-plots")}},
		{&folds[0], []string{"fold", files.before, "--basis", j("pair.basis.json"), "--out", j("before.components.tif")}},
		{&folds[1], []string{"fold", files.after, "--basis", j("pair.basis.json"), "--out", j("after.components.tif")}},
		{&chg, []string{"change", files.before, files.after, "--out", j("change"), "--reference", files.truth, "--preview-bands", "3,2,1"}},
	}
	for _, st := range steps {
		if err := step(st.v, st.args...); err != nil {
			return err
		}
	}
	rep.print(g, o, files, c, &hyperLearn, &hyperFold, &hyperUnfold, &pairLearn, folds, &chg)
	return nil
}

// demoReport prints the closing report of the demo.
type demoReport struct{}

func (demoReport) print(g *globals, o *demoOptions, files demoFiles, c *scenario.Catchment, hl *basisSummary, hf *foldResult, hu *unfoldSummary, pl *basisSummary, folds [2]foldResult, chg *changeSummary) {
	if g.quiet {
		return
	}
	w := g.stderr
	fmt.Fprintf(w, "\n== %s (invented scenario): report\n", scenario.Name)
	fmt.Fprintf(w, "compression of the %d-band hyperspectral cube:\n", hl.Bands)
	fmt.Fprintf(w, "  %d components keep %.2f%% of the variance (broken-stick rule: %d)\n", hl.Components, 100*hl.Cumulative[hl.Components-1], hl.BrokenStick)
	if hu.LossReport != nil && hu.CompressionRatio != nil {
		psnr := math.NaN()
		if hu.MeanPSNR != nil {
			psnr = *hu.MeanPSNR
		}
		fmt.Fprintf(w, "  int16 components + basis: %.1f : 1 against lossless DEFLATE; rmse %.2f, mean PSNR %.1f dB, mean spectral angle %.2f deg\n",
			*hu.CompressionRatio, hu.RMSE, psnr, hu.MeanSAM)
	}
	fmt.Fprintf(w, "multispectral pair: %d components keep %.2f%%; explained on %s %.4f, on %s %.4f\n",
		pl.Components, 100*pl.Cumulative[pl.Components-1], c.Dates()[0], folds[0].ExplainedScene, c.Dates()[1], folds[1].ExplainedScene)
	fmt.Fprintf(w, "change %s -> %s: %d changed pixels", c.Dates()[0], c.Dates()[1], chg.ChangedPixels)
	if chg.ChangedAreaHa != nil {
		fmt.Fprintf(w, ", mapped area of change %.1f ha", *chg.ChangedAreaHa)
	}
	fmt.Fprintf(w, ", %d patches\n", chg.Patches)
	if r := chg.Reference; r != nil {
		fmt.Fprintf(w, "  against the scenario's truth: recall %.3f, false alarms %.3f%% of unchanged pixels, precision %.3f, F1 %.3f\n",
			r.Recall, 100*r.FalseAlarmRate, r.Precision, r.F1)
	}
	fmt.Fprintf(w, "  %s\n", caution)
	fmt.Fprintf(w, "\noutputs in %s:\n", o.dir)
	var paths []string
	filepath.WalkDir(o.dir, func(p string, d fs.DirEntry, err error) error {
		if err == nil && !d.IsDir() {
			paths = append(paths, p)
		}
		return nil
	})
	sort.Strings(paths)
	for _, p := range paths {
		fmt.Fprintf(w, "  %s\n", p)
	}
}
