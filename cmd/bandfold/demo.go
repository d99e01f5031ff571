package main

import (
	"context"

	"github.com/spf13/cobra"

	"bandfold/cmd/bandfold/internal/cli"
	"bandfold/cmd/bandfold/internal/demo"
	"bandfold/cmd/bandfold/internal/jobkit"
)

func newDemoCommand(g *globals) *cobra.Command {
	o := demo.DemoOptions{}
	cmd := &cobra.Command{
		Use:   "demo",
		Short: "Make the invented Vessel river scenario and run the whole job on it",
		Long:  cli.DemoHelp,
		Example: `  bandfold demo --dir demo-out
  bandfold demo --dir small --size 512`,
		Args: args(cobra.NoArgs),
		RunE: g.runE(func(ctx context.Context, env jobkit.Env, _ []string) error {
			res, err := demo.Demo(ctx, env, o)
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
func (g *globals) reportDemo(o demo.DemoOptions, r *demo.DemoResult) {
	if !g.quiet {
		cli.DemoText(g.stderr, o, r)
	}
}
