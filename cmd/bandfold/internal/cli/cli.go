// Package cli holds the command-line plumbing that bandfold's commands
// share: the input flags and their translation into job options, the
// one-line format of warnings, and the progress bar.
package cli

import (
	"context"
	"fmt"
	"io"
	"log/slog"
	"regexp"
	"strings"

	"github.com/spf13/pflag"

	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/raster"
)

// LineHandler prints log records as one readable line each: "warning: ..."
// for warnings, "debug: ..." with the record's attributes for details.
type LineHandler struct {
	W       io.Writer
	Level   slog.Level
	Details bool
	attrs   []slog.Attr
}

func (h *LineHandler) Enabled(_ context.Context, l slog.Level) bool { return l >= h.Level }

func (h *LineHandler) Handle(_ context.Context, r slog.Record) error {
	var b strings.Builder
	b.WriteString(strings.ToLower(r.Level.String()))
	if r.Level == slog.LevelWarn {
		b.Reset()
		b.WriteString("warning")
	}
	b.WriteString(": ")
	b.WriteString(r.Message)
	if h.Details || r.Level < slog.LevelInfo {
		add := func(a slog.Attr) bool {
			fmt.Fprintf(&b, " %s=%v", a.Key, a.Value)
			return true
		}
		for _, a := range h.attrs {
			add(a)
		}
		r.Attrs(add)
	}
	b.WriteByte('\n')
	_, err := io.WriteString(h.W, b.String())
	return err
}

func (h *LineHandler) WithAttrs(as []slog.Attr) slog.Handler {
	c := *h
	c.attrs = append(append([]slog.Attr(nil), h.attrs...), as...)
	return &c
}

func (h *LineHandler) WithGroup(string) slog.Handler { return h }

// InputFlags are the flags that say how to read an input image.
type InputFlags struct {
	bands      string
	assets     string
	nodata     string
	masks      []string
	tile       int
	calibrate  string
	align      bool
	resampling string
	stack      bool
}

// Register adds the input flags; alignment flags only where the command
// does not define --align itself (change warps AFTER onto BEFORE with it).
func (f *InputFlags) Register(fs *pflag.FlagSet, align bool) {
	fs.StringVar(&f.bands, "bands", "", `bands to use, 1-based lists and ranges such as "1-5,7" (default all)`)
	fs.StringVar(&f.assets, "assets", "", `STAC items: the assets to stack, in order, by key or eo:bands common name ("red,nir08,swir16"; default the item's data assets)`)
	fs.StringVar(&f.nodata, "nodata", "", `nodata value overriding the files': one for all bands, or a comma list with one per band ("nan" for NaN)`)
	fs.StringArrayVar(&f.masks, "mask", nil, `quality mask (repeatable; a pixel must pass all): FILE (non-zero = valid), FILE:bits=0-4,9 (invalid where a listed bit is set), FILE:values=0,3,8-10 (invalid at those values), or by a product's names: QA_PIXEL.TIF:qa_pixel=fill,cloud,cloud_shadow (Landsat Collection 2), SCL.jp2:scl=no_data,clouds (Sentinel-2 Level-2A)`)
	MarkInputs(fs, InputMask, "mask")
	fs.IntVar(&f.tile, "tile", 0, "tile size N for N x N pixel tiles (default: aligned to the file's blocks, about 16 MiB of float64 per tile)")
	fs.StringVar(&f.calibrate, "calibrate", "", `scale (the bands' scale/offset metadata), toa (Landsat Level-1 digital numbers to top-of-atmosphere reflectance from the *_MTL.txt beside the bands) or reflectance (as the product defines it: TOA for Landsat Level-1, surface reflectance for Landsat Collection 2 Level-2, bottom-of-atmosphere for Sentinel-2 Level-2A); default scale, or the basis's`)
	if align {
		fs.BoolVar(&f.align, "align", false, "warp every file of a stack onto its first file's grid with GDAL (for bands at other resolutions)")
		fs.StringVar(&f.resampling, "resampling", "", "resampling for --align: nearest, bilinear, cubic, cubicspline, lanczos, average, mode (default bilinear)")
		fs.BoolVar(&f.stack, "stack", false, "read the IMAGE arguments as one stack of bands, in the order given (for one file per band)")
	}
}

// Input translates the flags.
func (f *InputFlags) Input() (jobkit.Input, error) {
	names := BandNames(f.bands)
	sel, err := raster.ParseBands(f.bands)
	if err != nil && names == nil {
		return jobkit.Input{}, &jobkit.UsageError{Err: fmt.Errorf("--%w", err)}
	}
	nd, err := raster.ParseNoData(f.nodata)
	if err != nil {
		return jobkit.Input{}, &jobkit.UsageError{Err: fmt.Errorf("--%w", err)}
	}
	masks, err := ParseMasks("--mask", f.masks)
	if err != nil {
		return jobkit.Input{}, err
	}
	in := jobkit.Input{Bands: sel, BandNames: names, NoData: nd, Masks: masks, Tile: f.tile, Align: f.align}
	if in.Assets, err = parseAssets(f.assets); err != nil {
		return jobkit.Input{}, err
	}
	if f.resampling != "" {
		if in.Resampling, err = raster.ParseResampling(f.resampling); err != nil {
			return jobkit.Input{}, jobkit.Usagef("--resampling %q: want nearest, bilinear, cubic, cubicspline, lanczos, average or mode", f.resampling)
		}
		if !f.align {
			return jobkit.Input{}, jobkit.Usagef("--resampling %s applies only with --align: add --align, or leave --resampling out", f.resampling)
		}
	}
	if f.calibrate != "" {
		if in.Calibrate, err = raster.ParseCalibration(f.calibrate); err != nil {
			return jobkit.Input{}, jobkit.Usagef("--calibrate %q: want %s", f.calibrate, strings.Join(raster.Calibrations, ", "))
		}
	}
	return in, nil
}

// BandNames returns the names of a --bands value that names bands ("B02,
// B03,B8A", "red,nir" ...: every item starts with a letter), nil for
// numbers, ranges or a mix.
func BandNames(spec string) []string {
	if strings.TrimSpace(spec) == "" {
		return nil
	}
	var out []string
	for _, item := range strings.Split(spec, ",") {
		item = strings.TrimSpace(item)
		if !bandName.MatchString(item) {
			return nil
		}
		out = append(out, item)
	}
	return out
}

var bandName = regexp.MustCompile(`^[A-Za-z][A-Za-z0-9_]*$`)

// parseAssets reads --assets: keys or band names joined with commas.
func parseAssets(spec string) ([]string, error) {
	if strings.TrimSpace(spec) == "" {
		return nil, nil
	}
	var out []string
	for _, a := range strings.Split(spec, ",") {
		a = strings.TrimSpace(a)
		if a == "" {
			return nil, jobkit.Usagef("--assets %q: an empty item between commas", spec)
		}
		out = append(out, a)
	}
	return out, nil
}

// Scenes applies --stack: all arguments become one stack.
func (f *InputFlags) Scenes(args []string) []string {
	if f.stack && len(args) > 1 {
		return []string{strings.Join(args, ",")}
	}
	return args
}

// ParseMasks reads repeated mask flags.
func ParseMasks(flag string, specs []string) ([]raster.MaskRule, error) {
	var out []raster.MaskRule
	for _, spec := range specs {
		r, err := raster.ParseMask(spec)
		if err != nil {
			return nil, jobkit.Usagef("%s %q: %s", flag, spec, strings.TrimPrefix(err.Error(), fmt.Sprintf("mask %q: ", spec)))
		}
		out = append(out, r)
	}
	return out, nil
}

// CheckCreationOptions refuses --co items that are not KEY=VALUE; GDAL
// checks the keys and values when the output is created.
func CheckCreationOptions(co []string) error {
	for _, kv := range co {
		if k, _, ok := strings.Cut(kv, "="); !ok || strings.TrimSpace(k) == "" {
			return jobkit.Usagef("--co %q: want KEY=VALUE", kv)
		}
	}
	return nil
}
