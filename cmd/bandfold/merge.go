package main

import (
	"context"

	"github.com/spf13/cobra"
	"github.com/spf13/pflag"

	"bandfold/cmd/bandfold/internal/cli"
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/learn"
)

func newMergeCommand(g *globals) *cobra.Command {
	o := learn.MergeOptions{}
	var set *pflag.FlagSet
	cmd := &cobra.Command{
		Use:     "merge PART... --out BASIS.json",
		Short:   "Combine the partial statistics of all shards into a basis",
		Long:    cli.MergeHelp,
		Example: `  bandfold merge parts/part-*.json --out scene.basis.json`,
		Args:    args(cobra.MinimumNArgs(1)),
		RunE: g.runE(func(ctx context.Context, env jobkit.Env, a []string) error {
			o.Parts = a
			if err := snrWithVariance(set); err != nil {
				return err
			}
			res, err := learn.Merge(ctx, env, o)
			if err != nil {
				return err
			}
			return g.reportBasis(res.Summary, res.Path)
		}),
	}
	f := cmd.Flags()
	set = f
	f.StringVarP(&o.Out, "out", "o", "", "basis file to write (JSON)")
	f.IntVarP(&o.Components, "components", "k", 0, "number of components to keep (overrides --variance)")
	f.Float64Var(&o.Variance, "variance", 0.99, "keep the fewest components whose cumulative share of variance reaches this fraction")
	f.Float64Var(&o.MinSNR, "min-snr", 0, "for MNF partials, keep the components whose signal-to-noise ratio is at least this")
	f.BoolVar(&o.Overwrite, "overwrite", false, "replace an existing output")
	cmd.MarkFlagRequired("out")
	cli.MarkArgs(cmd, cli.InputFile)
	return cmd
}
