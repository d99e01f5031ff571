package main

import (
	"context"
	"fmt"
	"os"
	"strings"

	"github.com/spf13/cobra"

	"bandfold/cmd/bandfold/internal/changefolder"
	"bandfold/cmd/bandfold/internal/cli"
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/pairchange"
	"bandfold/cmd/bandfold/internal/series"
	"bandfold/raster"
)

type changeFlags struct {
	seriesFlags
	previewBands string
	maskBefore   []string
	maskAfter    []string
	bandsBefore  string
	bandsAfter   string
	o            pairchange.ChangeOptions
}

func newChangeCommand(g *globals) *cobra.Command { return changeCommand(g, &changeFlags{}) }

// changeCommand binds the command's flags to fl.
func changeCommand(g *globals, fl *changeFlags) *cobra.Command {
	cmd := &cobra.Command{
		Use:   "change BEFORE AFTER --out DIR",
		Short: "Map land-cover change between two dates from component score differences",
		Long:  cli.ChangeHelp + jobkit.Caution,
		Example: `  bandfold change 2023.tif 2024.tif --out change-2024
  bandfold change l7-2001.tif l8-2013.tif --out change --bands-before 1-4 --bands-after 2-5 --min-area 0.5ha
  bandfold change 2023.tif 2024.tif --out change --threshold chisq:0.9999 --min-area 0.5ha --reference truth.gpkg
  bandfold change a.tif b.tif --out change --align --resampling bilinear --mask-after clouds-b.tif`,
		Args: args(cobra.ExactArgs(2)),
		RunE: g.runE(func(ctx context.Context, env jobkit.Env, a []string) error {
			o, err := fl.options(a[0], a[1])
			if err != nil {
				return err
			}
			if staged, err := g.runStaged(ctx, env, "change", o.Staging, func(ctx context.Context, env jobkit.Env) (*series.StageResult, error) {
				return pairchange.ChangeStage(ctx, env, o)
			}); staged {
				return err
			}
			res, err := pairchange.Change(ctx, env, o)
			if err != nil {
				return err
			}
			g.reportChange(res)
			return g.emit(res)
		}),
	}
	f := cmd.Flags()
	o := &fl.o
	fl.register(f, &o.SharedOptions, seriesHelp{command: "change", align: "warp AFTER onto BEFORE's grid with GDAL when the grids differ",
		resampling: "resampling for --align: bilinear (the default), nearest (categorical data), cubic, cubicspline, lanczos, average, mode",
		basis:      "basis to use instead of fitting one on both dates", sample: "pixels sampled to estimate the no-change distribution",
		normalize: "radiometric normalisation of AFTER onto BEFORE: stable (orthogonal regression over stable pixels) or none"})
	f.StringArrayVar(&fl.maskBefore, "mask-before", nil, "quality mask of the BEFORE date only, as --mask (repeatable)")
	f.StringArrayVar(&fl.maskAfter, "mask-after", nil, "quality mask of the AFTER date only, on BEFORE's grid, as --mask (repeatable)")
	f.StringVar(&fl.bandsBefore, "bands-before", "", "bands of BEFORE only, as --bands (for a change of sensor)")
	f.StringVar(&fl.bandsAfter, "bands-after", "", "bands of AFTER only, as --bands; the same number as BEFORE's")
	f.BoolVar(&o.Differences, "differences", false, "also write differences.tif (d - m per component)")
	f.BoolVar(&o.PValues, "pvalues", false, "also write pvalue.tif (the no-change p-value of Z)")
	f.StringVar(&o.Reference, "reference", "", "reference change data: a raster on the same grid (non-zero = changed) or a vector file of changed polygons")
	f.StringVar(&fl.previewBands, "preview-bands", "", "three 1-based bands of AFTER for preview.png (default: the first three)")
	cmd.MarkFlagRequired("out")
	cli.MarkArgs(cmd, cli.InputImage)
	cli.MarkInputs(f, cli.InputFile, "basis", "reference")
	cli.MarkInputs(f, cli.InputMask, "mask-before", "mask-after")
	return cmd
}

// options translates the flags.
func (fl *changeFlags) options(before, after string) (pairchange.ChangeOptions, error) {
	o := fl.o
	o.Before, o.After = before, after
	if err := fl.shared(&o.SharedOptions, os.Getenv); err != nil {
		return o, err
	}
	var err error
	if o.PreviewBands, err = raster.ParseBands(fl.previewBands); err != nil || (fl.previewBands != "" && len(o.PreviewBands) != 3) {
		return o, usagef("--preview-bands %q: want three band numbers such as 3,2,1", fl.previewBands)
	}
	if o.MaskBefore, err = parseMasks("--mask-before", fl.maskBefore); err != nil {
		return o, err
	}
	if o.MaskAfter, err = parseMasks("--mask-after", fl.maskAfter); err != nil {
		return o, err
	}
	for _, b := range []struct {
		flag, spec string
		dst        *[]int
	}{{"bands-before", fl.bandsBefore, &o.BandsBefore}, {"bands-after", fl.bandsAfter, &o.BandsAfter}} {
		sel, err := raster.ParseBands(b.spec)
		if err != nil {
			return o, usagef("--%s %q: %v", b.flag, b.spec, strings.TrimPrefix(err.Error(), fmt.Sprintf("bands %q: ", b.spec)))
		}
		*b.dst = sel
	}
	return o, nil
}

// reportChange prints the summary table on stderr.
func (g *globals) reportChange(s *changefolder.ChangeResult) {
	if !g.quiet {
		cli.ChangeText(g.stderr, s)
	}
}
