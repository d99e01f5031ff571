package main

import (
	"context"
	"fmt"
	"os"

	"github.com/spf13/cobra"

	"bandfold/cmd/bandfold/internal/cli"
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/series"
	"bandfold/cmd/bandfold/internal/timeline"
	"bandfold/raster"
	"bandfold/transform/change"
)

type timelineFlags struct {
	input      inputFlags
	threshold  string
	minArea    string
	dates      []string
	sceneBands []string
	format     string
	stage      stageFlags
	o          timeline.TimelineOptions
}

func newTimelineCommand(g *globals) *cobra.Command { return timelineCommand(g, &timelineFlags{}) }

// timelineCommand binds the command's flags to fl.
func timelineCommand(g *globals, fl *timelineFlags) *cobra.Command {
	cmd := &cobra.Command{
		Use:   "timeline SCENE... --out DIR",
		Short: "Map when each pixel changed over a series of at least three dates",
		Long:  cli.TimelineHelp + jobkit.Caution,
		Example: `  bandfold timeline 2019.tif 2020.tif 2021.tif 2022.tif --out timeline
  bandfold timeline a.tif b.tif c.tif --dates 2016-07-01,2017-06-28,2018-07-03 --out timeline`,
		Args: args(cobra.MinimumNArgs(1)),
		RunE: g.runE(func(ctx context.Context, env jobkit.Env, a []string) error {
			o, err := fl.options(a)
			if err != nil {
				return err
			}
			if o.Staging, err = fl.stage.staging(os.Getenv); err != nil {
				return err
			}
			if !o.WritesFolder() {
				res, err := timeline.TimelineStage(ctx, env, o)
				if err != nil {
					return err
				}
				return g.stageDone("timeline", res)
			}
			res, err := timeline.Timeline(ctx, env, o)
			if err != nil {
				return err
			}
			if !g.quiet {
				cli.TimelineText(g.stderr, res)
			}
			return g.emit(res)
		}),
	}
	f := cmd.Flags()
	fl.input.register(f, false)
	o := &fl.o
	f.StringVarP(&o.Out, "out", "o", "", "folder for the outputs")
	f.StringSliceVar(&fl.dates, "dates", nil, "the scenes' dates in the order given (YYYY-MM-DD, YYYYMMDD or YYYY); default: metadata, else the file names")
	f.BoolVar(&o.Align, "align", false, "warp every scene onto the first's grid with GDAL when the grids differ")
	f.StringVar(&o.Resampling, "resampling", "", "resampling for --align (default bilinear)")
	f.StringVarP(&o.Basis, "basis", "b", "", "basis to use instead of fitting one on all dates")
	f.IntVarP(&o.Components, "components", "k", 0, "number of components (default: 99% of the pooled variance, at least 3)")
	f.StringVar(&fl.threshold, "threshold", change.DefaultThreshold, "chisq:Q, sigma:N, otsu or value:Z")
	f.StringVar(&fl.minArea, "min-area", "4px", "minimum mapping unit: a number with m2, ha, km2 or px; 0 turns it off")
	f.StringVar(&fl.format, "format", "gtiff", "raster format of the outputs: gtiff or cog (Cloud Optimized GeoTIFF, with overviews)")
	f.StringArrayVar(&o.Output.CreationOptions, "co", nil, "GDAL creation option KEY=VALUE for the rasters written (repeatable)")
	f.StringVar(&o.Normalize, "normalize", series.NormalizeStable, "radiometric normalisation of every date onto the reference date: stable or none")
	f.StringVar(&o.Confirm, "confirm", timeline.ConfirmLasting, "lasting (a flag must last and not be a return) or none (keep every flag)")
	f.IntVar(&o.Sample, "sample", change.DefaultSampleSize, "pixels sampled per pair to estimate its no-change distribution")
	f.BoolVar(&o.Overwrite, "overwrite", false, "replace a previous timeline output folder")
	f.StringArrayVar(&fl.sceneBands, "scene-bands", nil, "bands of one scene, as --bands; give it once per scene, in the order of the scenes (for a change of sensor)")
	f.StringVar(&o.ReferenceDate, "reference-date", "", "the date every date is normalised onto (default: the first)")
	f.BoolVar(&o.IgnoreBandNames, "ignore-band-names", false, "compare the dates band for band even where their wavelengths differ")
	fl.stage.register(f, "timeline")
	cmd.MarkFlagRequired("out")
	cli.MarkArgs(cmd, cli.InputImage)
	cli.MarkInputs(f, cli.InputFile, "basis")
	return cmd
}

// options translates the flags.
func (fl *timelineFlags) options(scenes []string) (timeline.TimelineOptions, error) {
	o := fl.o
	o.Scenes, o.Dates = scenes, fl.dates
	var err error
	if o.Threshold, err = change.ParseThreshold(fl.threshold); err != nil {
		return o, &jobkit.UsageError{Err: fmt.Errorf("--%w", err)}
	}
	if o.MinArea, err = jobkit.ParseMinArea(fl.minArea); err != nil {
		return o, err
	}
	if o.Normalize, err = series.ParseNormalize(o.Normalize); err != nil {
		return o, err
	}
	if o.Output.Format, err = raster.ParseFormat(fl.format); err != nil {
		return o, usagef("--format %q: want gtiff or cog", fl.format)
	}
	if o.Input, err = fl.input.input(); err != nil {
		return o, err
	}
	for i, spec := range fl.sceneBands {
		sel, err := raster.ParseBands(spec)
		if err != nil || len(sel) == 0 {
			return o, usagef("--scene-bands %q (scene %d): want bands such as \"1-5,7\"", spec, i+1)
		}
		o.SceneBands = append(o.SceneBands, sel)
	}
	return o, nil
}
