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

type denoiseFlags struct {
	input  inputFlags
	format string
	o      fold.DenoiseOptions
}

func newDenoiseCommand(g *globals) *cobra.Command { return denoiseCommand(g, &denoiseFlags{}) }

// denoiseCommand binds the command's flags to fl.
func denoiseCommand(g *globals, fl *denoiseFlags) *cobra.Command {
	cmd := &cobra.Command{
		Use:     "denoise IMAGE --basis B.json --out OUT.tif",
		Short:   "Fold and unfold an image in one pass: keep the k leading components",
		Long:    cli.DenoiseHelp,
		Example: `  bandfold denoise cube.tif --basis cube.mnf.json --out cube.denoised.tif -k 12`,
		Args:    args(cobra.ExactArgs(1)),
		RunE: g.runE(func(ctx context.Context, env jobkit.Env, a []string) error {
			o := fl.o
			o.Image = a[0]
			var err error
			if o.Format, err = raster.ParseFormat(fl.format); err != nil {
				return &jobkit.UsageError{Err: fmt.Errorf("--%w", err)}
			}
			if o.Input, err = fl.input.input(); err != nil {
				return err
			}
			res, err := fold.Denoise(ctx, env, o)
			if err != nil {
				return err
			}
			g.info("wrote %s: %d bands from %d %s components, %d pixels", res.Output, res.Bands, res.Components, res.Method, res.Pixels)
			return g.emit(res)
		}),
	}
	f := cmd.Flags()
	fl.input.register(f, true)
	o := &fl.o
	f.StringVarP(&o.Basis, "basis", "b", "", "basis file (learn --method mnf for noise removal)")
	f.StringVarP(&o.Out, "out", "o", "", "denoised image to write")
	f.IntVarP(&o.Components, "components", "k", 0, "components to keep (default: the basis's)")
	f.StringVar(&o.Type, "type", "same", "same (the bands' type), float32 or float64")
	f.StringVar(&fl.format, "format", "gtiff", "gtiff or cog")
	f.StringArrayVar(&o.CreationOptions, "co", nil, "GDAL creation option KEY=VALUE (repeatable)")
	f.BoolVar(&o.Overwrite, "overwrite", false, "replace an existing output")
	cmd.MarkFlagRequired("basis")
	cmd.MarkFlagRequired("out")
	cli.MarkArgs(cmd, cli.InputImage)
	cli.MarkInputs(f, cli.InputFile, "basis")
	return cmd
}
