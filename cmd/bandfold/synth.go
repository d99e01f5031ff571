package main

import (
	"context"

	"github.com/spf13/cobra"

	"bandfold/cmd/bandfold/internal/cli"
	"bandfold/cmd/bandfold/internal/demo"
	"bandfold/cmd/bandfold/internal/jobkit"
)

func newSynthCommand(g *globals) *cobra.Command {
	o := demo.SynthOptions{}
	cmd := &cobra.Command{
		Use:   "synth --bands P --width W --height H --out FILE",
		Short: "Write a synthetic cube of spectrally correlated bands (for benchmarks)",
		Long:  cli.SynthHelp,
		Example: `  bandfold demo synth --bands 224 --width 1024 --height 1024 --type int16 --out cube224.tif
  bandfold demo synth --bands 7 --width 8192 --height 8192 --type uint16 --block 512 --out scene7.tif`,
		Args: args(cobra.NoArgs),
		RunE: g.runE(func(ctx context.Context, env jobkit.Env, _ []string) error {
			res, err := demo.Synth(ctx, env, o)
			if err != nil {
				return err
			}
			g.info("wrote %s: %d bands, %dx%d, %s", res.Out, res.Bands, res.Width, res.Height, res.Type)
			return g.emit(res)
		}),
	}
	f := cmd.Flags()
	f.IntVar(&o.Bands, "bands", 0, "number of bands")
	f.IntVar(&o.Width, "width", 0, "width in pixels")
	f.IntVar(&o.Height, "height", 0, "height in pixels")
	f.StringVar(&o.Type, "type", "int16", "int16, uint16 or float32")
	f.IntVar(&o.Block, "block", 256, "internal tile size of the GeoTIFF")
	f.StringVar(&o.Interleave, "interleave", "pixel", "pixel or band")
	f.StringVarP(&o.Out, "out", "o", "", "output GeoTIFF")
	f.Uint64Var(&o.Seed, "seed", 1, "seed")
	f.BoolVar(&o.Overwrite, "overwrite", false, "replace an existing output")
	for _, name := range []string{"bands", "width", "height", "out"} {
		cmd.MarkFlagRequired(name)
	}
	return cmd
}
