package raster

import (
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"syscall"

	"github.com/airbusgeo/godal"

	"bandfold/tiles"
)

// Format is an output raster format.
type Format string

// Output formats.
const (
	GTiff Format = "gtiff" // tiled GeoTIFF, DEFLATE with predictor
	COG   Format = "cog"   // Cloud Optimized GeoTIFF through GDAL's COG driver
)

// ParseFormat checks a --format value.
func ParseFormat(s string) (Format, error) {
	switch f := Format(strings.ToLower(s)); f {
	case GTiff, COG:
		return f, nil
	}
	return "", fmt.Errorf("format %q: want gtiff or cog: %w", s, ErrBadSpec)
}

// ErrExists is returned when an output exists and overwriting was not asked.
var ErrExists = errors.New("exists (use --overwrite to replace it)")

// Spec describes a raster output.
type Spec struct {
	Grid
	Bands int
	// DataType is a GDAL type name: Byte, Int16, UInt16, Int32, Float32, Float64.
	DataType string
	// NoData, when set, is declared on every band.
	NoData *float64
	// Descriptions name the bands; Scales and Offsets, when set, are the
	// bands' scale/offset metadata.
	Descriptions    []string
	Scales, Offsets []float64
	// Metadata is written to the dataset's default metadata domain.
	Metadata map[string]string
	// ColorTable, when set, is given to band 1 (Byte outputs).
	ColorTable [][4]int16
	Format     Format
	// CreationOptions are KEY=VALUE options that override bandfold's
	// defaults (--co).
	CreationOptions []string
	Overwrite       bool
}

// Output is a raster being written under a temporary name in its target
// folder. Commit renames it into place; Abort removes it. Write from one
// goroutine only.
type Output struct {
	pending
	spec Spec
}

// pending is a file written under a temporary name beside its final path:
// publish renames it into place, discard closes its dataset and removes it
// with the sidecar files GDAL may have made (names tmp+suffix). After either,
// both do nothing.
type pending struct {
	path, tmp string
	sidecars  []string
	ds        *godal.Dataset
	done      bool
}

// removeTemp removes the temporary file and its sidecars.
func (p *pending) removeTemp() {
	os.Remove(p.tmp)
	for _, suffix := range p.sidecars {
		os.Remove(p.tmp + suffix)
	}
}

// publish renames the closed temporary file into place.
func (p *pending) publish() error {
	if err := os.Rename(p.tmp, p.path); err != nil {
		return err
	}
	p.done = true
	return nil
}

// discard closes the dataset, if open, and removes the temporary files.
func (p *pending) discard() {
	if p.done {
		return
	}
	if p.ds != nil {
		p.ds.Close(errLogger)
		p.ds = nil
	}
	p.removeTemp()
	p.done = true
}

// CheckTarget refuses output paths that cannot be written atomically: GDAL
// virtual paths, a missing folder, an existing file without overwrite.
func CheckTarget(path string, overwrite bool) error {
	if IsVirtual(path) {
		return fmt.Errorf("output %s: a GDAL virtual path cannot be written atomically; write to a local path and copy it", path)
	}
	dir := filepath.Dir(path)
	fi, err := os.Stat(dir)
	if err != nil {
		return fmt.Errorf("output %s: folder %s does not exist", path, dir)
	}
	if !fi.IsDir() {
		return fmt.Errorf("output %s: %s is not a folder", path, dir)
	}
	if fi, err := os.Stat(path); err == nil {
		if fi.IsDir() {
			return fmt.Errorf("output %s: is a folder", path)
		}
		if !overwrite {
			return fmt.Errorf("output %s %w", path, ErrExists)
		}
	}
	return nil
}

// TempPath returns a hidden temporary name beside path, unique to this
// process.
func TempPath(path, suffix string) string {
	dir, base := filepath.Split(path)
	return filepath.Join(dir, fmt.Sprintf(".%s.%d.tmp%s", base, os.Getpid(), suffix))
}

func dataType(name string) (godal.DataType, error) {
	for _, dt := range []godal.DataType{godal.Byte, godal.Int16, godal.UInt16, godal.Int32, godal.UInt32, godal.Float32, godal.Float64} {
		if strings.EqualFold(dt.String(), name) {
			return dt, nil
		}
	}
	return godal.Unknown, fmt.Errorf("unsupported output data type %q", name)
}

// creationOptions merges bandfold's GeoTIFF defaults with the user's.
func creationOptions(dt godal.DataType, user []string) []string {
	predictor, level := "2", "6"
	if dt == godal.Float32 || dt == godal.Float64 {
		// Real-valued outputs (component scores, statistics) are close to
		// incompressible: on 7 bands x 8192 x 8192 folded to 3 float32
		// components, DEFLATE level 1 wrote a file 0.6% larger than the
		// default level 6 in 70% of the time.
		predictor, level = "3", "1"
	}
	// NUM_THREADS lets GDAL compress blocks on all cores while tiles are
	// written in order from one goroutine.
	opts := []string{"TILED=YES", "BLOCKXSIZE=256", "BLOCKYSIZE=256", "COMPRESS=DEFLATE", "PREDICTOR=" + predictor, "ZLEVEL=" + level, "BIGTIFF=IF_SAFER", "NUM_THREADS=ALL_CPUS"}
	return mergeOptions(opts, user)
}

// mergeOptions returns base with each KEY=VALUE of over replacing the same key.
func mergeOptions(base, over []string) []string {
	out := append([]string(nil), base...)
	for _, kv := range over {
		k, _, _ := strings.Cut(kv, "=")
		replaced := false
		for i, b := range out {
			if bk, _, _ := strings.Cut(b, "="); strings.EqualFold(bk, k) {
				out[i], replaced = kv, true
			}
		}
		if !replaced {
			out = append(out, kv)
		}
	}
	return out
}

// Create starts writing a raster to path: it checks the target, then creates
// a GeoTIFF under a temporary name in the same folder with the grid, nodata,
// band descriptions, scale/offset and metadata of spec.
func Create(path string, spec Spec) (*Output, error) {
	if err := CheckTarget(path, spec.Overwrite); err != nil {
		return nil, err
	}
	for _, kv := range spec.CreationOptions {
		if !strings.Contains(kv, "=") {
			return nil, fmt.Errorf("output %s: creation option %q is not KEY=VALUE", path, kv)
		}
	}
	dt, err := dataType(spec.DataType)
	if err != nil {
		return nil, fmt.Errorf("output %s: %w", path, err)
	}
	o := &Output{pending: pending{path: path, tmp: TempPath(path, ".tif"), sidecars: []string{".aux.xml"}}, spec: spec}
	opts := creationOptions(dt, spec.CreationOptions)
	if spec.Format == COG {
		// The COG driver copies a finished dataset; write a plain tiled
		// GeoTIFF first without the user's options, which are COG options.
		opts = creationOptions(dt, nil)
	}
	ds, err := godal.Create(godal.GTiff, o.tmp, spec.Bands, dt, spec.Width, spec.Height, godal.CreationOption(opts...), errLogger)
	if err != nil {
		o.removeTemp()
		return nil, fmt.Errorf("create %s: %w", path, err)
	}
	o.ds = ds
	if err := o.describe(); err != nil {
		o.Abort()
		return nil, fmt.Errorf("create %s: %w", path, err)
	}
	return o, nil
}

func (o *Output) describe() error {
	s := o.spec
	if s.HasGeoTransform {
		if err := o.ds.SetGeoTransform(s.GeoTransform, errLogger); err != nil {
			return err
		}
	}
	if s.Projection != "" {
		if err := o.ds.SetProjection(s.Projection, errLogger); err != nil {
			return err
		}
	}
	for k, v := range s.Metadata {
		if err := o.ds.SetMetadata(k, v, errLogger); err != nil {
			return err
		}
	}
	for i, b := range o.ds.Bands() {
		if s.NoData != nil {
			if err := b.SetNoData(*s.NoData, errLogger); err != nil {
				return err
			}
		}
		if i < len(s.Descriptions) {
			if err := b.SetDescription(s.Descriptions[i], errLogger); err != nil {
				return err
			}
		}
		if i < len(s.Scales) {
			if err := b.SetScaleOffset(s.Scales[i], s.Offsets[i], errLogger); err != nil {
				return err
			}
		}
		if i == 0 && s.ColorTable != nil {
			ct := godal.ColorTable{PaletteInterp: godal.RGBPalette, Entries: s.ColorTable}
			if err := b.SetColorTable(ct, errLogger); err != nil {
				return err
			}
		}
	}
	return nil
}

// Write writes window t of all bands from src, pixel-major (the band values
// of a pixel are consecutive). GDAL converts to the output type.
func (o *Output) Write(t tiles.Tile, src []float64) error {
	n := t.Pixels() * o.spec.Bands
	if len(src) < n {
		panic(fmt.Sprintf("raster: %d values to write for %v of %d bands", len(src), t, o.spec.Bands))
	}
	if err := o.ds.Write(t.X, t.Y, src[:n], t.W, t.H, errLogger); err != nil {
		return fmt.Errorf("write %s at %v: %w", o.path, t, err)
	}
	return nil
}

// WriteBand writes window t of one 0-based band from src (t.W x t.H values)
// of any numeric slice type GDAL accepts.
func (o *Output) WriteBand(band int, t tiles.Tile, src any) error {
	if err := o.ds.Bands()[band].Write(t.X, t.Y, src, t.W, t.H, errLogger); err != nil {
		return fmt.Errorf("write %s band %d at %v: %w", o.path, band+1, t, err)
	}
	return nil
}

// SetMetadata sets a dataset metadata item, for example a completion record
// written just before Commit.
func (o *Output) SetMetadata(key, value string) error {
	if err := o.ds.SetMetadata(key, value, errLogger); err != nil {
		return fmt.Errorf("write %s: %w", o.path, err)
	}
	return nil
}

// Commit finishes the output: it closes the dataset (write errors surface
// there), converts to COG when asked, and renames the file into place.
func (o *Output) Commit() error {
	if o.done {
		return nil
	}
	ds := o.ds
	o.ds = nil
	if err := ds.Close(errLogger); err != nil {
		o.Abort()
		return fmt.Errorf("write %s: %w", o.path, err)
	}
	if o.spec.Format == COG {
		if err := o.toCOG(); err != nil {
			o.Abort()
			return err
		}
	}
	if err := o.publish(); err != nil {
		o.Abort()
		return fmt.Errorf("write %s: %w", o.path, err)
	}
	return nil
}

func (o *Output) toCOG() error {
	src, err := godal.Open(o.tmp, errLogger)
	if err != nil {
		return fmt.Errorf("write %s: %w", o.path, err)
	}
	defer src.Close(errLogger)
	cog := TempPath(o.path, ".cog.tif")
	opts := mergeOptions([]string{"COMPRESS=DEFLATE", "BIGTIFF=IF_SAFER"}, o.spec.CreationOptions)
	var sw []string
	for _, kv := range opts {
		sw = append(sw, "-co", kv)
	}
	out, err := src.Translate(cog, append([]string{"-of", "COG"}, sw...), errLogger)
	if err != nil {
		os.Remove(cog)
		return fmt.Errorf("write %s as COG: %w", o.path, err)
	}
	if err := out.Close(errLogger); err != nil {
		os.Remove(cog)
		return fmt.Errorf("write %s as COG: %w", o.path, err)
	}
	if err := os.Rename(cog, o.tmp); err != nil {
		os.Remove(cog)
		return fmt.Errorf("write %s: %w", o.path, err)
	}
	return nil
}

// Abort discards the output: the dataset is closed and the temporary file
// removed. It is safe to call after Commit (it then does nothing) and more
// than once.
func (o *Output) Abort() { o.discard() }

// Path returns the final path of the output.
func (o *Output) Path() string { return o.path }

// DeflateSize returns the size in bytes of a lossless copy of the raster at
// path with DEFLATE compression and the predictor suited to its data type:
// the reference against which compression ratios are stated. The copy is
// written to a temporary file in dir and removed.
func DeflateSize(path, dir string) (int64, error) {
	src, err := openDataset(path)
	if err != nil {
		return 0, err
	}
	defer src.Close(errLogger)
	dt := src.Bands()[0].Structure().DataType
	tmp, err := os.CreateTemp(dir, ".bandfold-deflate-*.tif")
	if err != nil {
		return 0, fmt.Errorf("lossless copy of %s: %w", path, err)
	}
	name := tmp.Name()
	tmp.Close()
	defer os.Remove(name)
	var sw []string
	for _, kv := range creationOptions(dt, nil) {
		sw = append(sw, "-co", kv)
	}
	out, err := src.Translate(name, append([]string{"-of", "GTiff"}, sw...), errLogger)
	if err != nil {
		return 0, fmt.Errorf("lossless copy of %s: %w", path, err)
	}
	if err := out.Close(errLogger); err != nil {
		return 0, fmt.Errorf("lossless copy of %s: %w", path, err)
	}
	fi, err := os.Stat(name)
	if err != nil {
		return 0, err
	}
	return fi.Size(), nil
}

// ReadMetadata returns the dataset metadata (default domain) of the raster
// at path.
func ReadMetadata(path string) (map[string]string, error) {
	ds, err := openDataset(path)
	if err != nil {
		return nil, err
	}
	defer ds.Close(errLogger)
	return ds.Metadatas(errLogger), nil
}

// RemoveStale removes temporary files that an earlier, killed process left
// beside path (".NAME.PID.tmp*" whose process is gone).
func RemoveStale(path string) {
	dir, base := filepath.Split(path)
	matches, _ := filepath.Glob(filepath.Join(dir, "."+base+".*.tmp*"))
	for _, m := range matches {
		rest := strings.TrimPrefix(filepath.Base(m), "."+base+".")
		pidText, _, _ := strings.Cut(rest, ".")
		pid, err := strconv.Atoi(pidText)
		if err != nil || pid == os.Getpid() {
			continue
		}
		if syscall.Kill(pid, 0) == syscall.ESRCH {
			os.Remove(m)
		}
	}
}
