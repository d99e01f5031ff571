package main

import (
	"context"
	"strings"

	"github.com/spf13/cobra"

	"bandfold/cmd/bandfold/internal/areasurvey"
	"bandfold/cmd/bandfold/internal/cli"
	"bandfold/cmd/bandfold/internal/jobkit"
)

func newSurveyCommand(g *globals) *cobra.Command {
	cmd := &cobra.Command{Use: "survey", Short: "Draw a reference sample of a change map and estimate areas from it", Long: "survey draw samples a change map for an interpreter to label; survey estimate turns the labels into area estimates with 95% intervals (Olofsson et al. 2014).\n\n" + jobkit.Caution,
		Example: "  bandfold survey draw change-2024 --points 300 --out survey.gpkg\n  bandfold survey estimate change-2024 survey.gpkg"}
	var o areasurvey.SurveyDrawOptions
	var acc string
	draw := &cobra.Command{
		Use: "draw DIR --points N --out survey.gpkg", Short: "Draw a stratified random sample of a change map's pixels",
		Example: "  bandfold survey draw change-2024 --points 300 --buffer 30m --out survey.gpkg",
		Args:    args(cobra.ExactArgs(1)),
		RunE: g.runE(func(ctx context.Context, env jobkit.Env, a []string) error {
			o.Dir = a[0]
			var err error
			if o.ExpectedAccuracy, err = cli.ParseAccuracy(acc); err != nil {
				return err
			}
			res, err := areasurvey.SurveyDraw(ctx, env, o)
			if err != nil {
				return err
			}
			g.info("drew %d points (%s) from %s; wrote %s", res.Points, res.Design, res.Map, strings.Join(res.Outputs, " and "))
			g.info("note: %s", res.Caution)
			return g.emit(res)
		}),
	}
	f := draw.Flags()
	f.IntVar(&o.Points, "points", 0, "sample size (or give --target-se)")
	f.StringVarP(&o.Out, "out", "o", "", "the survey GeoPackage (survey.csv is written beside it)")
	f.StringVar(&o.Map, "map", "", "a classified raster to sample instead of DIR's change.tif (0 no change, other values change)")
	f.StringVar(&o.Buffer, "buffer", "0", "near-change stratum: no-change pixels within this distance of change, in px or m (0 = none)")
	f.IntVar(&o.MinPerStratum, "min-per-stratum", 50, "fewest points in any stratum")
	f.Float64Var(&o.TargetSE, "target-se", 0, "size the sample for this standard error of the change proportion (Cochran 1977)")
	f.StringVar(&acc, "expected-accuracy", "", "expected user's accuracy per class for --target-se, as change=U,no change=U")
	f.Uint64Var(&o.Seed, "seed", 1, "seed of the draw")
	f.BoolVar(&o.Overwrite, "overwrite", false, "replace an existing survey")
	draw.MarkFlagRequired("out")
	cli.MarkArgs(draw, cli.InputFile)
	cli.MarkInputs(f, cli.InputImage, "map")
	var e areasurvey.SurveyEstimateOptions
	est := &cobra.Command{
		Use: "estimate DIR survey.gpkg|survey.csv", Short: "Estimate areas and accuracy from a labelled survey",
		Example: "  bandfold survey estimate change-2024 survey.gpkg --json",
		Args:    args(cobra.ExactArgs(2)),
		RunE: g.runE(func(ctx context.Context, env jobkit.Env, a []string) error {
			e.Dir, e.Survey = a[0], a[1]
			res, err := areasurvey.SurveyEstimate(ctx, env, e)
			if err != nil {
				return err
			}
			g.info("%d of %d points drawn labelled, %d excluded (no label), %d missing from the survey; %s", res.Labelled, res.Drawn, res.Excluded, res.Missing, res.Estimator)
			for _, c := range res.Classes {
				if c.AreaHa != nil {
					g.info("  %-10s mapped %.2f ha, estimated %.2f ± %.2f ha (95%% interval %.2f to %.2f ha)", c.Class, *c.MappedAreaHa, *c.AreaHa, *c.AreaSEHa, c.AreaCI95Ha[0], c.AreaCI95Ha[1])
				}
			}
			g.info("  overall accuracy %.3f ± %.3f; wrote %s", res.OverallAccuracy, res.OverallAccuracySE, strings.Join(res.Paths.ResolveAll(res.Outputs), " and "))
			g.info("note: %s", res.Caution)
			return g.emit(res)
		}),
	}
	est.Flags().BoolVar(&e.Overwrite, "overwrite", false, "replace an existing estimate.json")
	cli.MarkArgs(est, cli.InputFile)
	cmd.AddCommand(draw, est)
	return cmd
}
