package main

import (
	"context"
	"fmt"

	"github.com/spf13/cobra"

	"bandfold/cmd/bandfold/internal/cli"
	"bandfold/cmd/bandfold/internal/fold"
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/raster"
)

type unfoldFlags struct {
	input  inputFlags // applies to the --compare image
	format string
	o      fold.UnfoldOptions
}

func newUnfoldCommand(g *globals) *cobra.Command { return unfoldCommand(g, &unfoldFlags{}) }

// unfoldCommand binds the command's flags to fl.
func unfoldCommand(g *globals, fl *unfoldFlags) *cobra.Command {
	cmd := &cobra.Command{
		Use:   "unfold COMPONENTS --basis BASIS.json --out RESTORED.tif",
		Short: "Reconstruct the bands from component images, and measure the loss",
		Long:  cli.UnfoldHelp,
		Example: `  bandfold unfold cube.components.tif --basis cube.basis.json --out cube.restored.tif --compare cube.tif
  bandfold unfold cube.components.tif --basis cube.basis.json --out restored.tif --type float32 --json`,
		Args: args(cobra.ExactArgs(1)),
		RunE: g.runE(func(ctx context.Context, env jobkit.Env, a []string) error {
			o, err := fl.options(a[0])
			if err != nil {
				return err
			}
			res, err := fold.Unfold(ctx, env, o)
			if err != nil {
				return err
			}
			g.reportUnfold(res)
			return g.emit(res)
		}),
	}
	f := cmd.Flags()
	fl.input.register(f, true)
	o := &fl.o
	f.StringVarP(&o.Basis, "basis", "b", "", "basis file the components were folded with")
	f.StringVarP(&o.Out, "out", "o", "", "restored image to write")
	f.StringVar(&o.Type, "type", "same", "same (the original bands' type), float32 or float64")
	f.StringVar(&o.Compare, "compare", "", "original image to measure the loss against")
	f.StringVar(&fl.format, "format", "gtiff", "gtiff or cog")
	f.StringArrayVar(&o.CreationOptions, "co", nil, "GDAL creation option KEY=VALUE (repeatable)")
	f.BoolVar(&o.Overwrite, "overwrite", false, "replace an existing output")
	f.BoolVar(&o.IgnoreBasisMismatch, "ignore-basis-mismatch", false, "unfold even when the components record another basis")
	cmd.MarkFlagRequired("basis")
	cmd.MarkFlagRequired("out")
	cli.MarkArgs(cmd, cli.InputImage)
	cli.MarkInputs(f, cli.InputFile, "basis")
	cli.MarkInputs(f, cli.InputImage, "compare")
	return cmd
}

// options translates the flags.
func (fl *unfoldFlags) options(components string) (fold.UnfoldOptions, error) {
	o := fl.o
	o.Components = components
	var err error
	if o.Format, err = raster.ParseFormat(fl.format); err != nil {
		return o, &jobkit.UsageError{Err: fmt.Errorf("--%w", err)}
	}
	if o.Input, err = fl.input.input(); err != nil {
		return o, err
	}
	if err := checkCreationOptions(o.CreationOptions); err != nil {
		return o, err
	}
	return o, nil
}

// reportUnfold prints what unfold wrote and the loss.
func (g *globals) reportUnfold(r *fold.UnfoldResult) {
	if !g.quiet {
		cli.UnfoldText(g.stderr, r)
	}
}
