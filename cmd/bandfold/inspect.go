package main

import (
	"context"
	"strings"

	"github.com/spf13/cobra"

	"bandfold/cmd/bandfold/internal/cli"
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/learn"
)

// inspectFlags are the flags of inspect: the job's options and what to
// print.
type inspectFlags struct {
	learn.InspectOptions
	// loadings prints the kept components' loadings as a table.
	loadings bool
}

func newInspectCommand(g *globals) *cobra.Command {
	fl := &inspectFlags{}
	cmd := &cobra.Command{
		Use:   "inspect BASIS",
		Short: "Print the variance table of a saved basis, and plot it",
		Long:  cli.InspectHelp,
		Example: `  bandfold inspect cube.basis.json
  bandfold inspect cube.basis.json --loadings
  bandfold inspect cube.basis.json --plots cube-plots --json`,
		Args: args(cobra.ExactArgs(1)),
		RunE: g.runE(func(ctx context.Context, env jobkit.Env, a []string) error {
			o := fl.InspectOptions
			o.Basis = a[0]
			res, err := learn.Inspect(ctx, env, o)
			if err != nil {
				return err
			}
			if len(res.Plots) > 0 {
				g.info("wrote %s", strings.Join(res.Plots, " and "))
			}
			if err := g.reportBasis(res.Summary, o.Basis); err != nil {
				return err
			}
			if fl.loadings {
				g.reportLoadings(res.Summary)
			}
			return nil
		}),
	}
	f := cmd.Flags()
	f.StringVar(&fl.Plots, "plots", "", "folder for scree.png, loadings.png, rate.png and report.html")
	f.BoolVar(&fl.loadings, "loadings", false, "print the kept components' loadings (bands x components) on stderr")
	f.BoolVar(&fl.Overwrite, "overwrite", false, "replace existing plots")
	f.Float64Var(&fl.MaxRMSE, "max-rmse", 0, "error budget drawn on rate.png")
	cli.MarkArgs(cmd, cli.InputFile)
	return cmd
}

// reportLoadings prints the loadings of the kept components on stderr.
func (g *globals) reportLoadings(s learn.BasisSummary) {
	if !g.quiet {
		cli.LoadingsTable(g.stderr, s)
	}
}
