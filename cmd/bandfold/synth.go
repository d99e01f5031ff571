package main

import (
	"context"
	"fmt"
	"strings"

	"github.com/spf13/cobra"

	"bandfold/cmd/bandfold/internal/scenario"
	"bandfold/raster"
	"bandfold/tiles"
)

type synthOptions struct {
	bands, width, height int
	dtype                string
	block                int
	interleave           string
	out                  string
	seed                 uint64
	overwrite            bool
}

func newSynthCommand(g *globals) *cobra.Command {
	o := &synthOptions{}
	cmd := &cobra.Command{
		Use:   "synth --bands P --width W --height H --out FILE",
		Short: "Write a synthetic cube of spectrally correlated bands (for benchmarks)",
		Long: `synth writes an invented cube: a few latent spectra mixed with smooth
abundance fields plus noise, so its principal components behave like those of
real imagery. The output is a tiled, uncompressed GeoTIFF.`,
		Example: `  bandfold demo synth --bands 224 --width 1024 --height 1024 --type int16 --out cube224.tif
  bandfold demo synth --bands 7 --width 8192 --height 8192 --type uint16 --block 512 --out scene7.tif`,
		Args: cobra.NoArgs,
		RunE: func(cmd *cobra.Command, _ []string) error {
			return runSynth(cmd.Context(), g, o)
		},
	}
	f := cmd.Flags()
	f.IntVar(&o.bands, "bands", 0, "number of bands")
	f.IntVar(&o.width, "width", 0, "width in pixels")
	f.IntVar(&o.height, "height", 0, "height in pixels")
	f.StringVar(&o.dtype, "type", "int16", "int16, uint16 or float32")
	f.IntVar(&o.block, "block", 256, "internal tile size of the GeoTIFF")
	f.StringVar(&o.interleave, "interleave", "pixel", "pixel or band")
	f.StringVarP(&o.out, "out", "o", "", "output GeoTIFF")
	f.Uint64Var(&o.seed, "seed", 1, "seed")
	f.BoolVar(&o.overwrite, "overwrite", false, "replace an existing output")
	for _, name := range []string{"bands", "width", "height", "out"} {
		cmd.MarkFlagRequired(name)
	}
	return cmd
}

func runSynth(ctx context.Context, g *globals, o *synthOptions) error {
	s := scenario.Synth{Bands: o.bands, Width: o.width, Height: o.height, Type: strings.ToLower(o.dtype), Seed: o.seed}
	if err := s.Validate(); err != nil {
		return usageError{err}
	}
	types := map[string]string{"int16": "Int16", "uint16": "UInt16", "float32": "Float32"}
	if o.block < 16 || o.block%16 != 0 {
		return usagef("--block %d: GeoTIFF tiles must be a multiple of 16", o.block)
	}
	il := strings.ToUpper(o.interleave)
	if il != "PIXEL" && il != "BAND" {
		return usagef("--interleave %q: want pixel or band", o.interleave)
	}
	wkt, err := raster.EPSG(32633)
	if err != nil {
		return err
	}
	spec := raster.Spec{
		Grid:     raster.Grid{Width: o.width, Height: o.height, GeoTransform: [6]float64{400000, 10, 0, 5600000, 0, -10}, HasGeoTransform: true, Projection: wkt},
		Bands:    o.bands,
		DataType: types[s.Type],
		CreationOptions: []string{"COMPRESS=NONE", "PREDICTOR=1", "INTERLEAVE=" + il,
			fmt.Sprintf("BLOCKXSIZE=%d", o.block), fmt.Sprintf("BLOCKYSIZE=%d", o.block)},
		Metadata:  map[string]string{"SCENARIO": "bandfold synthetic cube (invented)"},
		Overwrite: o.overwrite,
	}
	// Tiles of whole blocks keep writes aligned; strips of a block for many bands.
	tw, th := tiles.SizeFor(o.width, o.height, o.block, o.block, o.bands, 8<<20)
	err = writeRaster(ctx, g, o.out, spec, tiles.NewGrid(o.width, o.height, tw, th), func(int) renderFunc {
		return func(t tiles.Tile, dst []float64) error {
			s.Render(t.X, t.Y, t.W, t.H, dst)
			return nil
		}
	})
	if err != nil {
		return err
	}
	g.info("wrote %s: %d bands, %dx%d, %s", o.out, o.bands, o.width, o.height, types[s.Type])
	return g.emit(map[string]any{"out": o.out, "bands": o.bands, "width": o.width, "height": o.height, "type": types[s.Type]})
}
