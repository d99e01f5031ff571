package main

import (
	"context"
	"fmt"

	"github.com/spf13/cobra"

	"bandfold/cmd/bandfold/internal/job"
	"bandfold/cmd/bandfold/internal/scenario"
)

func newDemoCommand(g *globals) *cobra.Command {
	o := job.DemoOptions{}
	cmd := &cobra.Command{
		Use:   "demo",
		Short: "Make the invented Vessel river scenario and run the whole job on it",
		Long: `demo writes an invented scenario: the Vessel river catchment, a fictional
place seen on two dates a year apart by an 8-band multispectral sensor at 10 m
(with a forest clearing, a growing reservoir and a burn scar between the
dates, and their truth mask), and by a 120-band hyperspectral sensor at 30 m.
It then runs bandfold's jobs on it and lists where every output lies.`,
		Example: `  bandfold demo --dir demo-out
  bandfold demo --dir small --size 512`,
		Args: args(cobra.NoArgs),
		RunE: g.runE(func(ctx context.Context, env job.Env, _ []string) error {
			res, err := job.Demo(ctx, env, o)
			if err != nil {
				return err
			}
			g.reportDemo(o, res)
			return g.emit(map[string]any{"dir": o.Dir, "change": res.Change, "compression": res.HyperUnfold, "outputs": res.Outputs})
		}),
	}
	f := cmd.Flags()
	f.StringVar(&o.Dir, "dir", "demo-out", "folder for the scenario and the results")
	f.IntVar(&o.Size, "size", 2048, "side of the 10 m scenes in pixels")
	f.Uint64Var(&o.Seed, "seed", 7, "seed of the invented scenario")
	f.BoolVar(&o.Overwrite, "overwrite", false, "replace outputs left by an earlier run")
	cmd.AddCommand(newSynthCommand(g))
	return cmd
}

// reportDemo prints the closing report of the demo.
func (g *globals) reportDemo(o job.DemoOptions, r *job.DemoResult) {
	if g.quiet {
		return
	}
	w, c := g.stderr, r.Scenario
	fmt.Fprintf(w, "%s (invented): %dx%d pixels at 10 m, dates %s and %s\n", scenario.Name, o.Size, o.Size, c.Dates()[0], c.Dates()[1])
	for _, e := range c.Events() {
		fmt.Fprintf(w, "  event %d: %s, %s -> %s, %d pixels (%.1f ha)\n", e.ID, e.Name, e.From, e.To, e.Area, float64(e.Area)*scenario.PixelSize*scenario.PixelSize/1e4)
	}
	hl, hu, pl, chg := r.HyperLearn.Summary, r.HyperUnfold, r.PairLearn.Summary, r.Change
	fmt.Fprintf(w, "\n== %s (invented scenario): report\n", scenario.Name)
	fmt.Fprintf(w, "compression of the %d-band hyperspectral cube:\n", hl.Bands)
	fmt.Fprintf(w, "  %d components keep %.2f%% of the variance (broken-stick rule: %d)\n", hl.Components, 100*hl.Cumulative[hl.Components-1], hl.BrokenStick)
	if hu.LossReport != nil && hu.CompressionRatio != nil {
		psnr := "undefined"
		if hu.MeanPSNR != nil {
			psnr = fmt.Sprintf("%.1f dB", *hu.MeanPSNR)
		}
		fmt.Fprintf(w, "  int16 components + basis: %.1f : 1 against lossless DEFLATE; rmse %.2f, mean PSNR %s, mean spectral angle %.2f deg\n",
			*hu.CompressionRatio, hu.RMSE, psnr, hu.MeanSAM)
	}
	fmt.Fprintf(w, "multispectral pair: %d components keep %.2f%%; explained on %s %s, on %s %s\n",
		pl.Components, 100*pl.Cumulative[pl.Components-1], c.Dates()[0], share(r.Folds[0].ExplainedScene), c.Dates()[1], share(r.Folds[1].ExplainedScene))
	fmt.Fprintf(w, "change %s -> %s: %d changed pixels", c.Dates()[0], c.Dates()[1], chg.ChangedPixels)
	if chg.ChangedAreaHa != nil {
		fmt.Fprintf(w, ", mapped area of change %.1f ha", *chg.ChangedAreaHa)
	}
	fmt.Fprintf(w, ", %d patches\n", chg.Patches)
	if ref := chg.Reference; ref != nil {
		fa := "undefined"
		if ref.FalseAlarmRate != nil {
			fa = fmt.Sprintf("%.3f%%", 100**ref.FalseAlarmRate)
		}
		fmt.Fprintf(w, "  against the scenario's truth: recall %s, false alarms %s of unchanged pixels, precision %s, F1 %s\n",
			rate(ref.Recall, 3), fa, rate(ref.Precision, 3), rate(ref.F1, 3))
	}
	fmt.Fprintf(w, "  %s\n", job.Caution)
	fmt.Fprintf(w, "\noutputs in %s:\n", o.Dir)
	for _, p := range r.Outputs {
		fmt.Fprintf(w, "  %s\n", p)
	}
}

// share prints an explained share, or "undefined".
func share(v *float64) string { return rate(v, 4) }
