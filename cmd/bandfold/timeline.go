package main

import (
	"context"
	"os"

	"github.com/spf13/cobra"

	"bandfold/cmd/bandfold/internal/cli"
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/series"
	"bandfold/cmd/bandfold/internal/timeline"
	"bandfold/raster"
)

type timelineFlags struct {
	seriesFlags
	dates      []string
	sceneBands []string
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
			if staged, err := g.runStaged(ctx, env, "timeline", o.Staging, func(ctx context.Context, env jobkit.Env) (*series.StageResult, error) {
				return timeline.TimelineStage(ctx, env, o)
			}); staged {
				return err
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
	o := &fl.o
	fl.register(f, &o.SharedOptions, seriesHelp{command: "timeline", align: "warp every scene onto the first's grid with GDAL when the grids differ",
		resampling: "resampling for --align (default bilinear)", basis: "basis to use instead of fitting one on all dates",
		sample:    "pixels sampled per pair to estimate its no-change distribution",
		normalize: "radiometric normalisation of every date onto the reference date: stable or none"})
	f.StringSliceVar(&fl.dates, "dates", nil, "the scenes' dates in the order given (YYYY-MM-DD, YYYYMMDD or YYYY); default: metadata, else the file names")
	f.StringVar(&o.Confirm, "confirm", timeline.ConfirmLasting, "lasting (a flag must last and not be a return) or none (keep every flag)")
	f.StringArrayVar(&fl.sceneBands, "scene-bands", nil, "bands of one scene, as --bands; give it once per scene, in the order of the scenes (for a change of sensor)")
	f.StringVar(&o.ReferenceDate, "reference-date", "", "the date every date is normalised onto (default: the first)")
	cmd.MarkFlagRequired("out")
	cli.MarkArgs(cmd, cli.InputImage)
	cli.MarkInputs(f, cli.InputFile, "basis")
	return cmd
}

// options translates the flags.
func (fl *timelineFlags) options(scenes []string) (timeline.TimelineOptions, error) {
	o := fl.o
	o.Scenes, o.Dates = scenes, fl.dates
	if err := fl.shared(&o.SharedOptions, os.Getenv); err != nil {
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
