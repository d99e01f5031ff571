package demo

import (
	"context"
	"fmt"
	"strings"

	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/scenario"
	"bandfold/raster"
	"bandfold/tiles"
)

// SynthOptions are the options of Synth.
type SynthOptions struct {
	Bands, Width, Height int
	// Type is int16, uint16 or float32.
	Type string
	// Block is the GeoTIFF's internal tile size; Interleave pixel or band.
	Block      int
	Interleave string
	Out        string
	Seed       uint64
	Overwrite  bool
}

// SynthResult describes the cube written.
type SynthResult struct {
	Out    string `json:"out"`
	Bands  int    `json:"bands"`
	Width  int    `json:"width"`
	Height int    `json:"height"`
	Type   string `json:"type"`
}

var synthTypes = map[string]string{"int16": "Int16", "uint16": "UInt16", "float32": "Float32"}

// Synth writes an invented cube of spectrally correlated bands, tiled and
// uncompressed, for benchmarks.
func Synth(ctx context.Context, env jobkit.Env, o SynthOptions) (_ *SynthResult, err error) {
	defer func() { err = jobkit.Classify(err) }()
	s := scenario.Synth{Bands: o.Bands, Width: o.Width, Height: o.Height, Type: strings.ToLower(o.Type), Seed: o.Seed}
	for _, v := range []struct {
		flag string
		n    int
	}{{"bands", o.Bands}, {"width", o.Width}, {"height", o.Height}} {
		if v.n < 1 {
			return nil, jobkit.Usagef("--%s %d: must be at least 1", v.flag, v.n)
		}
	}
	if _, ok := synthTypes[s.Type]; !ok {
		return nil, jobkit.Usagef("--type %q: want int16, uint16 or float32", o.Type)
	}
	if err := s.Validate(); err != nil {
		return nil, jobkit.Usage(err)
	}
	if o.Block < 16 || o.Block%16 != 0 {
		return nil, jobkit.Usagef("--block %d: GeoTIFF tiles must be a multiple of 16", o.Block)
	}
	il := strings.ToUpper(o.Interleave)
	if il != "PIXEL" && il != "BAND" {
		return nil, jobkit.Usagef("--interleave %q: want pixel or band", o.Interleave)
	}
	wkt, err := raster.EPSG(32633)
	if err != nil {
		return nil, err
	}
	spec := raster.Spec{
		Grid:     raster.Grid{Width: o.Width, Height: o.Height, GeoTransform: [6]float64{400000, 10, 0, 5600000, 0, -10}, HasGeoTransform: true, Projection: wkt},
		Bands:    o.Bands,
		DataType: synthTypes[s.Type],
		CreationOptions: []string{"COMPRESS=NONE", "PREDICTOR=1", "INTERLEAVE=" + il,
			fmt.Sprintf("BLOCKXSIZE=%d", o.Block), fmt.Sprintf("BLOCKYSIZE=%d", o.Block)},
		Metadata:  map[string]string{"SCENARIO": "bandfold synthetic cube (invented)"},
		Overwrite: o.Overwrite,
	}
	// Tiles of whole blocks keep writes aligned; strips of a block for many bands.
	tw, th := tiles.SizeFor(o.Width, o.Height, o.Block, o.Block, o.Bands, 8<<20)
	err = jobkit.WriteRaster(ctx, env, o.Out, spec, tiles.NewGrid(o.Width, o.Height, tw, th), func(int) jobkit.RenderFunc {
		return func(t tiles.Tile, dst []float64) error {
			s.Render(t.X, t.Y, t.W, t.H, dst)
			return nil
		}
	})
	if err != nil {
		return nil, err
	}
	return &SynthResult{Out: o.Out, Bands: o.Bands, Width: o.Width, Height: o.Height, Type: synthTypes[s.Type]}, nil
}
