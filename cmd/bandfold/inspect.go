package main

import (
	"context"
	"strings"

	"github.com/spf13/cobra"

	"bandfold/cmd/bandfold/internal/job"
)

func newInspectCommand(g *globals) *cobra.Command {
	o := job.InspectOptions{}
	cmd := &cobra.Command{
		Use:   "inspect BASIS",
		Short: "Print the variance table of a saved basis, and plot it",
		Long: `inspect prints the variance table of a basis file. With --plots DIR it
also writes scree.png (share of variance per component, the cumulative
share, the chosen k and the broken-stick reference) and loadings.png (band x
component loadings of the kept components on a diverging scale centred on
zero).`,
		Example: `  bandfold inspect cube.basis.json
  bandfold inspect cube.basis.json --plots cube-plots --json`,
		Args: args(cobra.ExactArgs(1)),
		RunE: g.runE(func(ctx context.Context, env job.Env, a []string) error {
			o.Basis = a[0]
			res, err := job.Inspect(ctx, env, o)
			if err != nil {
				return err
			}
			if len(res.Plots) > 0 {
				g.info("wrote %s", strings.Join(res.Plots, " and "))
			}
			return g.reportBasis(res.Summary, o.Basis)
		}),
	}
	cmd.Flags().StringVar(&o.Plots, "plots", "", "folder for scree.png and loadings.png")
	cmd.Flags().BoolVar(&o.Overwrite, "overwrite", false, "replace existing plots")
	return cmd
}
