package raster

/*
#include <stdlib.h>
#include <cpl_conv.h>
#include <cpl_error.h>
#include <cpl_string.h>
#include <gdal.h>

// bandfoldValidateOption checks one KEY=VALUE creation option against the
// driver's list with GDAL's own validation, errors kept off stderr. It
// returns 0 when GDAL refuses it, with GDAL's message in *msg (free it with
// VSIFree). An unknown driver, or GDAL_VALIDATE_CREATION_OPTIONS=NO, lets
// every option through.
static int bandfoldValidateOption(const char *driver, const char *kv, char **msg) {
	GDALDriverH drv = GDALGetDriverByName(driver);
	if (drv == NULL || !CPLTestBool(CPLGetConfigOption("GDAL_VALIDATE_CREATION_OPTIONS", "YES"))) {
		return 1;
	}
	char *opts[2] = {(char *)kv, NULL};
	CPLPushErrorHandler(CPLQuietErrorHandler);
	CPLErrorReset();
	int ok = GDALValidateCreationOptions(drv, opts);
	if (!ok) {
		*msg = CPLStrdup(CPLGetLastErrorMsg());
	}
	CPLPopErrorHandler();
	return ok;
}
*/
import "C"

import (
	"cmp"
	"errors"
	"fmt"
	"io/fs"
	"os"
	"strings"
	"unsafe"

	"github.com/airbusgeo/godal"

	"bandfold/raster/output"
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
	return "", specErr(ErrBadSpec, "format %q: want gtiff or cog", s)
}

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
	// BandMetadata, when set, holds items for each band's default metadata
	// domain.
	BandMetadata []map[string]string
	// Wavelengths, when set, are the bands' centre wavelengths and widths,
	// written as GDAL's convention has them (see Wavelength), in a COG in
	// the .aux.xml beside it (see keepWavelengths), and read back by
	// Stack.Wavelengths.
	Wavelengths []Wavelength
	// Classes, when set, name and colour the values of every band of a
	// class raster (change, steps, dates): each band gets a thematic
	// raster attribute table (columns value, name, red, green, blue,
	// alpha), GDAL category names when every value is from 0 to 255, and
	// a one-band Byte output also a colour table (TIFF's palette). A
	// GeoTIFF has no place for attribute tables and category names: GDAL
	// keeps them in an .aux.xml file beside it, which Commit moves beside
	// the output.
	Classes []Class
	// Colour marks a quicklook meant as colour: its 3 or 4 bands are
	// written as red, green, blue (and alpha), PHOTOMETRIC=RGB. Every other
	// output of more than one band is written PHOTOMETRIC=MINISBLACK, so
	// that GDAL reads band 1 as gray and the others as undefined: component
	// images, codes, steps and statistics are not colour images, and GDAL's
	// GeoTIFF driver would otherwise call any 3 or 4 Byte bands
	// red/green/blue/alpha (so that a value 0 in a fourth band shows as
	// transparent).
	Colour bool
	Format Format
	// Compress, when set, is the GeoTIFF compression (see BestCompression)
	// in place of DEFLATE, with the same predictor (in COG output too).
	Compress string
	// Categorical marks a raster of class codes: a COG's overviews take the
	// nearest value, not the average.
	Categorical bool
	// CreationOptions are KEY=VALUE options that override bandfold's
	// defaults (--co).
	CreationOptions []string
	Overwrite       bool
}

// Output is a raster being written under a temporary name beside its
// target (an output.File). Finish completes the file under that name,
// Commit moves it into place, Abort removes it. Write from one goroutine
// only.
type Output struct {
	file     *output.File
	ds       *godal.Dataset
	spec     Spec
	finished bool
	// bytes is the conversion buffer of a SignedByte output.
	bytes []byte
}

// SignedByte is the DataType of signed 8-bit integers, written (GDAL 3.6
// has no Int8) as Byte with the creation option PIXELTYPE=SIGNEDBYTE, the
// values stored in two's complement, and read back as -128..127.
const SignedByte = "Int8"

func dataType(name string) (godal.DataType, error) {
	if name == SignedByte {
		return godal.Byte, nil
	}
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

// cogOptions merges bandfold's COG defaults with the user's: the
// compression and predictor of the GeoTIFF path (the COG driver's
// PREDICTOR=YES is the horizontal predictor, FLOATING_POINT the
// floating-point one), overviews averaged for continuous values and
// nearest for class codes.
func cogOptions(spec Spec, dt godal.DataType) []string {
	predictor, resampling := "YES", "AVERAGE"
	if dt == godal.Float32 || dt == godal.Float64 {
		predictor = "FLOATING_POINT"
	}
	if spec.Categorical || len(spec.Classes) > 0 {
		resampling = "NEAREST"
	}
	base := []string{"COMPRESS=" + cmp.Or(spec.Compress, "DEFLATE"), "PREDICTOR=" + predictor, "BIGTIFF=IF_SAFER",
		"OVERVIEW_RESAMPLING=" + resampling, "NUM_THREADS=ALL_CPUS"}
	return mergeOptions(base, COGSpelling(spec.CreationOptions))
}

// COGSpelling rewrites GeoTIFF options in the COG driver's words: its
// compression level is LEVEL (GTiff: ZLEVEL, ZSTD_LEVEL), its predictor NO,
// YES or FLOATING_POINT (GTiff: 1, 2, 3). Others pass as they are.
func COGSpelling(opts []string) []string {
	out := make([]string, len(opts))
	for i, kv := range opts {
		k, v, _ := strings.Cut(kv, "=")
		switch strings.ToUpper(k) {
		case "ZLEVEL", "ZSTD_LEVEL":
			kv = "LEVEL=" + v
		case "PREDICTOR":
			if p, ok := map[string]string{"1": "NO", "2": "YES", "3": "FLOATING_POINT"}[v]; ok {
				kv = "PREDICTOR=" + p
			}
		}
		out[i] = kv
	}
	return out
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

// Create starts writing a raster to path: it checks the creation options
// and the target, then creates a GeoTIFF under a temporary name beside path
// (making missing parent folders) with the grid, nodata, band descriptions,
// scale/offset and metadata of spec. A creation option that the driver does
// not know, or a value it does not accept, is an error: GDAL would only warn.
func Create(path string, spec Spec) (*Output, error) {
	for _, kv := range spec.CreationOptions {
		if !strings.Contains(kv, "=") {
			return nil, fmt.Errorf("output %s: creation option %q is not KEY=VALUE", path, kv)
		}
	}
	dt, err := dataType(spec.DataType)
	if err != nil {
		return nil, fmt.Errorf("output %s: %w", path, err)
	}
	checkClasses(spec.Classes)
	var base []string
	if spec.Compress != "" {
		base = append(base, "COMPRESS="+spec.Compress)
	}
	if spec.DataType == SignedByte {
		base = append(base, "PIXELTYPE=SIGNEDBYTE")
	}
	base = append(base, photometric(spec)...)
	opts := creationOptions(dt, append(base, spec.CreationOptions...))
	driver, user := "GTiff", opts
	if spec.Format == COG {
		// The COG driver copies a finished dataset; write a plain tiled
		// GeoTIFF first without the user's options, which are COG options.
		opts, driver, user = creationOptions(dt, base), "COG", cogOptions(spec, dt)
	}
	if err := validateOptions(driver, user); err != nil {
		return nil, fmt.Errorf("output %s: %w", path, err)
	}
	f, err := output.Create(path, spec.Overwrite, ".tif")
	if err != nil {
		return nil, err
	}
	// ".cog.tif" is the COG copy that Finish makes of the temporary;
	// ".aux.xml" holds what GeoTIFF has no place for (Spec.Classes).
	f.Sidecars(".cog.tif", ".cog.tif.aux.xml")
	f.Companions(".aux.xml")
	o := &Output{file: f, spec: spec}
	ds, err := godal.Create(godal.GTiff, f.Temp(), spec.Bands, dt, spec.Width, spec.Height, godal.CreationOption(opts...), errLogger)
	if err != nil {
		f.Abort()
		return nil, fmt.Errorf("create %s: %w", path, tidy(err))
	}
	o.ds = ds
	if err := o.describe(); err != nil {
		o.Abort()
		return nil, fmt.Errorf("create %s: %w", path, tidy(err))
	}
	return o, nil
}

// CheckCreationOptions refuses, before any work, creation options that
// the format's GDAL driver (GTiff, or COG) does not know or whose value it
// does not accept, and options that are not KEY=VALUE.
func CheckCreationOptions(format Format, opts []string) error {
	for _, kv := range opts {
		if !strings.Contains(kv, "=") {
			return specErr(ErrBadSpec, "creation option %q is not KEY=VALUE", kv)
		}
	}
	driver := "GTiff"
	if format == COG {
		driver = "COG"
	}
	return validateOptions(driver, opts)
}

// photometric returns the creation options that set the bands' roles:
// none for one band (gray, or a palette with a colour table), RGB for a
// colour quicklook, MINISBLACK for every other multi-band output. The
// user's --co may still override them.
func photometric(spec Spec) []string {
	switch {
	case spec.Colour && (spec.Bands < 3 || spec.Bands > 4):
		panic(fmt.Sprintf("raster: a colour output of %d bands (want 3 or 4)", spec.Bands))
	case spec.Colour && spec.Bands == 4:
		return []string{"PHOTOMETRIC=RGB", "ALPHA=YES"}
	case spec.Colour:
		return []string{"PHOTOMETRIC=RGB"}
	case spec.Bands > 1:
		return []string{"PHOTOMETRIC=MINISBLACK"}
	}
	return nil
}

// BestCompression returns the lossless GeoTIFF compression for integer
// codes: ZSTD where this GDAL build's GeoTIFF driver offers it, else
// DEFLATE.
func BestCompression() string {
	cd := C.CString("GTiff")
	defer C.free(unsafe.Pointer(cd))
	drv := C.GDALGetDriverByName(cd)
	if drv == nil {
		return "DEFLATE"
	}
	key := C.CString("DMD_CREATIONOPTIONLIST")
	defer C.free(unsafe.Pointer(key))
	if list := C.GDALGetMetadataItem(C.GDALMajorObjectH(drv), key, nil); list != nil && strings.Contains(C.GoString(list), "<Value>ZSTD</Value>") {
		return "ZSTD"
	}
	return "DEFLATE"
}

// validateOptions checks creation options against the named driver's list,
// as GDAL does before creating a file, but as an error naming the option.
// GDAL_VALIDATE_CREATION_OPTIONS=NO in the environment turns the check off,
// as it does GDAL's.
func validateOptions(driver string, opts []string) error {
	cd := C.CString(driver)
	defer C.free(unsafe.Pointer(cd))
	for _, kv := range opts {
		ckv := C.CString(kv)
		var msg *C.char
		ok := C.bandfoldValidateOption(cd, ckv, &msg)
		C.free(unsafe.Pointer(ckv))
		if ok == 0 {
			text := strings.TrimSpace(C.GoString(msg))
			C.VSIFree(unsafe.Pointer(msg))
			return specErr(ErrBadSpec, "creation option %s: %s", kv, firstLine(text))
		}
	}
	return nil
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
		if err := o.describeBand(i, b); err != nil {
			return err
		}
	}
	return nil
}

// describeBand sets band i's nodata, description, scale and offset,
// metadata and classes.
func (o *Output) describeBand(i int, b godal.Band) error {
	s := o.spec
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
	if i < len(s.BandMetadata) {
		for k, v := range s.BandMetadata[i] {
			if err := b.SetMetadata(k, v, errLogger); err != nil {
				return err
			}
		}
	}
	if i < len(s.Wavelengths) {
		if err := s.Wavelengths[i].set(b); err != nil {
			return err
		}
	}
	return setClasses(b, s.Classes, s.Bands == 1 && s.DataType == "Byte")
}

// Write writes window t of all bands from src, pixel-major (the band values
// of a pixel are consecutive). GDAL converts to the output type.
func (o *Output) Write(t tiles.Tile, src []float64) error {
	n := t.Pixels() * o.spec.Bands
	if len(src) < n {
		panic(fmt.Sprintf("raster: %d values to write for %v of %d bands", len(src), t, o.spec.Bands))
	}
	var buf any = src[:n]
	if o.spec.DataType == SignedByte {
		// GDAL 3.6 would clamp negative values to the Byte range: store the
		// two's complement bytes.
		if cap(o.bytes) < n {
			o.bytes = make([]byte, n)
		}
		b := o.bytes[:n]
		for i, v := range src[:n] {
			b[i] = byte(int8(max(-128, min(127, v))))
		}
		buf = b
	}
	if err := o.dataset().Write(t.X, t.Y, buf, t.W, t.H, errLogger); err != nil {
		return fmt.Errorf("write %s at %v: %w", o.Path(), t, tidy(err))
	}
	return nil
}

// WriteFloat32 is Write for a Float32 output from values already
// converted, so that the conversion can be done by the worker that made
// them rather than by the one goroutine writing.
func (o *Output) WriteFloat32(t tiles.Tile, src []float32) error {
	n := t.Pixels() * o.spec.Bands
	if len(src) < n || o.spec.DataType != "Float32" {
		panic(fmt.Sprintf("raster: %d float32 values to write for %v of %d bands of %s", len(src), t, o.spec.Bands, o.spec.DataType))
	}
	if err := o.dataset().Write(t.X, t.Y, src[:n], t.W, t.H, errLogger); err != nil {
		return fmt.Errorf("write %s at %v: %w", o.Path(), t, tidy(err))
	}
	return nil
}

// WriteBand writes window t of one 0-based band from src (t.W x t.H values)
// of any numeric slice type GDAL accepts.
func (o *Output) WriteBand(band int, t tiles.Tile, src any) error {
	if err := o.dataset().Bands()[band].Write(t.X, t.Y, src, t.W, t.H, errLogger); err != nil {
		return fmt.Errorf("write %s band %d at %v: %w", o.Path(), band+1, t, tidy(err))
	}
	return nil
}

// SetMetadata sets a dataset metadata item, for example a completion record
// written just before Commit.
func (o *Output) SetMetadata(key, value string) error {
	if err := o.dataset().SetMetadata(key, value, errLogger); err != nil {
		return fmt.Errorf("write %s: %w", o.Path(), tidy(err))
	}
	return nil
}

// dataset returns the open dataset; writing after Finish is a programming
// error.
func (o *Output) dataset() *godal.Dataset {
	if o.ds == nil {
		panic("raster: write to a finished or aborted output")
	}
	return o.ds
}

// Finish completes the file under its temporary name: it closes the dataset
// (write errors surface there) and converts to COG when asked. After it the
// file at Temp is whole and can be opened by path, for checks before
// Commit. On failure the output is aborted. Finish after Finish does
// nothing.
func (o *Output) Finish() error {
	if o.finished {
		return nil
	}
	if o.ds == nil {
		return fmt.Errorf("write %s: output was aborted", o.Path())
	}
	ds := o.ds
	o.ds = nil
	if err := ds.Close(errLogger); err != nil {
		o.Abort()
		return fmt.Errorf("write %s: %w", o.Path(), tidy(err))
	}
	if o.spec.Format == COG {
		if err := o.toCOG(); err != nil {
			o.Abort()
			return err
		}
	}
	o.finished = true
	return nil
}

// Commit finishes the output, if Finish was not called, and moves the file
// into place (output.File.Commit: without Overwrite, a file that appeared
// at the path meanwhile is never replaced), then the .aux.xml GDAL wrote
// beside it, if any (see Spec.Classes). On failure the output is aborted.
func (o *Output) Commit() error {
	if err := o.Finish(); err != nil {
		return err
	}
	return o.file.Commit()
}

// toCOG copies the finished temporary GeoTIFF with GDAL's COG driver and
// puts the copy, and the .aux.xml GDAL made beside it if any, in its place.
func (o *Output) toCOG() error {
	tmp := o.file.Temp()
	cog := tmp + ".cog.tif"
	if err := o.translateCOG(tmp, cog); err != nil {
		return err
	}
	if err := os.Rename(cog, tmp); err != nil {
		return fmt.Errorf("write %s: %w", o.Path(), tidy(err))
	}
	err := os.Rename(cog+".aux.xml", tmp+".aux.xml")
	if errors.Is(err, fs.ErrNotExist) {
		err = os.Remove(tmp + ".aux.xml")
	}
	if err != nil && !errors.Is(err, fs.ErrNotExist) {
		return fmt.Errorf("write %s: %w", o.Path(), tidy(err))
	}
	return o.keepWavelengths(tmp)
}

// keepWavelengths gives the COG at path the bands' wavelengths again: GDAL
// 3.6 copies only the default metadata domain of bands (the COG driver, as
// gdal_translate and GTiff's CreateCopy), and writing them into the COG
// would move its header to the end of the file and break its layout, so
// they go into the .aux.xml beside it, where GDAL keeps metadata of a file
// opened read-only.
func (o *Output) keepWavelengths(path string) error {
	if len(o.spec.Wavelengths) == 0 {
		return nil
	}
	ds, err := openWithAux(path)
	if err != nil {
		return fmt.Errorf("write %s: %w", o.Path(), err)
	}
	for i, b := range ds.Bands() {
		if i < len(o.spec.Wavelengths) {
			err = errors.Join(err, o.spec.Wavelengths[i].set(b))
		}
	}
	if err = errors.Join(err, ds.Close(errLogger)); err != nil {
		return fmt.Errorf("write %s: wavelengths: %w", o.Path(), tidy(err))
	}
	return nil
}

// translateCOG writes the COG copy of src at dst, with what GDAL keeps in
// src's .aux.xml.
func (o *Output) translateCOG(src, dst string) error {
	in, err := openWithAux(src)
	if err != nil {
		return fmt.Errorf("write %s: %w", o.Path(), tidy(err))
	}
	defer in.Close(errLogger)
	var sw []string
	dt, err := dataType(o.spec.DataType)
	if err != nil {
		return fmt.Errorf("write %s: %w", o.Path(), err)
	}
	for _, kv := range cogOptions(o.spec, dt) {
		sw = append(sw, "-co", kv)
	}
	out, err := in.Translate(dst, append([]string{"-of", "COG"}, sw...), errLogger)
	if err != nil {
		return fmt.Errorf("write %s as COG: %w", o.Path(), tidy(err))
	}
	if err := out.Close(errLogger); err != nil {
		return fmt.Errorf("write %s as COG: %w", o.Path(), tidy(err))
	}
	return nil
}

// Abort discards the output: the dataset is closed and the temporary file
// removed, with the parent folders Create made. It is safe to call after
// Commit (it then does nothing) and more than once.
func (o *Output) Abort() {
	if o.ds != nil {
		o.ds.Close(errLogger)
		o.ds = nil
	}
	o.file.Abort()
}

// Path returns the final path of the output.
func (o *Output) Path() string { return o.file.Path() }

// Temp returns the temporary path the output is written to; after Finish
// the file there is complete.
func (o *Output) Temp() string { return o.file.Temp() }

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
