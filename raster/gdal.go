// Package raster is bandfold's only door to GDAL. It opens input stacks (one
// multiband file or several files stacked in order as one logical p-band
// image), checks that they share one grid or warps them onto the first
// file's, applies quality masks and calibration (band scale and offset, or
// Landsat top-of-atmosphere reflectance from the product's MTL file), reads
// tile windows of all selected bands into float64 buffers with a validity
// mask (or, for 8- and 16-bit integer bands, band-sequentially into int16
// without widening: ReadInt16, and Int16Reader, which reads the next
// windows ahead while the caller works on the current one), and writes
// GeoTIFF, Cloud Optimized GeoTIFF and GeoPackage outputs atomically.
//
// GDAL dataset handles are not safe to share across goroutines: a Stack holds
// only descriptions, and every worker opens its own Reader (an Int16Reader's
// reads run on a goroutine of tiles.Prefetch, one at a time).
package raster

/*
#cgo pkg-config: gdal
#include <stdlib.h>
#include <cpl_conv.h>
#include <cpl_string.h>
#include <cpl_vsi.h>
#include <gdal.h>
*/
import "C"

import (
	"cmp"
	"errors"
	"fmt"
	"log/slog"
	"slices"
	"strings"
	"sync"
	"sync/atomic"
	"unsafe"

	"github.com/airbusgeo/godal"
)

// Config is the GDAL configuration bandfold sets before its first GDAL call.
type Config struct {
	// CacheMB bounds GDAL's raster block cache, in MiB. Reads are aligned
	// to the files' blocks, so a small cache is enough and keeps memory
	// bounded whatever the scene size.
	CacheMB int
	// Options are extra KEY=VALUE configuration options.
	Options []string
	// Log receives GDAL's warnings at debug level; nil discards them.
	Log *slog.Logger
}

var (
	initOnce sync.Once
	initErr  error
	gdalLog  atomic.Pointer[slog.Logger]
)

// Init sets GDAL's configuration and registers its drivers. It must be
// called before any other function of this package; later calls do nothing.
// Options already present in the environment win over bandfold's defaults, so
// users keep the last word on GDAL's behaviour.
func Init(cfg Config) error {
	if cfg.Log != nil {
		gdalLog.Store(cfg.Log)
	}
	initOnce.Do(func() {
		if cfg.CacheMB <= 0 {
			cfg.CacheMB = 64
		}
		defaults := []string{
			fmt.Sprintf("GDAL_CACHEMAX=%d", cfg.CacheMB),
			// Uncompressed tiled GeoTIFF reads several times faster
			// straight into the caller's buffer.
			"GTIFF_DIRECT_IO=YES",
			// Reads of /vsicurl/ and /vsis3/ paths need no directory
			// listing to find sidecar files. {noext} admits URLs whose
			// last element has no extension, as STAC API items have
			// (".../collections/C/items/ID").
			"GDAL_DISABLE_READDIR_ON_OPEN=EMPTY_DIR",
			"CPL_VSIL_CURL_ALLOWED_EXTENSIONS=.tif,.tiff,.vrt,.jp2,.img,.nc,.h5,.zip,.gpkg,.json,.geojson,{noext}",
		}
		for _, kv := range append(defaults, cfg.Options...) {
			k, v, ok := strings.Cut(kv, "=")
			if !ok {
				initErr = fmt.Errorf("GDAL option %q is not KEY=VALUE", kv)
				return
			}
			if isConfigSet(k) && !slices.Contains(cfg.Options, kv) {
				continue // set in the environment
			}
			setConfig(k, v)
		}
		C.GDALSetCacheMax64(C.GIntBig(cfg.CacheMB) << 20)
		godal.RegisterAll()
	})
	return initErr
}

func isConfigSet(k string) bool {
	ck := C.CString(k)
	defer C.free(unsafe.Pointer(ck))
	return C.CPLGetConfigOption(ck, nil) != nil
}

func setConfig(k, v string) {
	ck, cv := C.CString(k), C.CString(v)
	defer C.free(unsafe.Pointer(ck))
	defer C.free(unsafe.Pointer(cv))
	C.CPLSetConfigOption(ck, cv)
}

// vsiReadDir lists a folder of GDAL's virtual file systems (/vsizip/,
// /vsis3/ ...), which godal does not offer; nil when it cannot be read.
func vsiReadDir(dir string) []string {
	cd := C.CString(dir)
	defer C.free(unsafe.Pointer(cd))
	list := C.VSIReadDir(cd)
	defer C.CSLDestroy(list)
	var names []string
	for i := range int(C.CSLCount(list)) {
		names = append(names, C.GoString(C.CSLGetField(list, C.int(i))))
	}
	return names
}

// quiet is the error handler given to GDAL calls: failures become errors,
// warnings and notes are logged at debug level, so a harmless warning never
// fails a read.
func quiet(ec godal.ErrorCategory, code int, msg string) error {
	if ec >= godal.CE_Failure {
		return errors.New(strings.TrimSpace(msg))
	}
	if ec == godal.CE_Warning {
		if l := gdalLog.Load(); l != nil {
			l.Debug("GDAL warning", "code", code, "msg", strings.TrimSpace(msg))
		}
	}
	return nil
}

var errLogger = godal.ErrLogger(quiet)

// tidyError is a GDAL error whose message is shortened to one line: GDAL
// and libtiff repeat a failure once per block or directory, so the distinct
// lines are kept in order, and a full disk is said plainly.
type tidyError struct {
	msg string
	err error
}

func (e *tidyError) Error() string { return e.msg }
func (e *tidyError) Unwrap() error { return e.err }

// tidy returns err with a one-line message (nil stays nil).
func tidy(err error) error {
	if err == nil {
		return nil
	}
	lines := strings.Split(err.Error(), "\n")
	var keep []string
	seen := map[string]bool{}
	for _, l := range lines {
		l = strings.TrimSpace(l)
		if strings.Contains(l, "No space left on device") || strings.Contains(l, "database or disk is full") {
			return &tidyError{"no space left on device", err}
		}
		if _, sqlite, ok := strings.Cut(l, "sqlite3_exec("); ok {
			// SQLite's statement is GeoPackage plumbing; its reason is not.
			_, reason, _ := strings.Cut(sqlite, ") failed: ")
			l = "the GeoPackage could not be written: " + cmp.Or(reason, "SQLite failed")
		}
		if l != "" && !seen[l] {
			seen[l] = true
			keep = append(keep, l)
		}
	}
	if len(keep) > 3 {
		keep = append(keep[:3], fmt.Sprintf("and %d more GDAL messages", len(keep)-3))
	}
	return &tidyError{strings.Join(keep, "; "), err}
}

// tidyRead is tidy for a failed read of a file's data: GDAL's read of a
// damaged or truncated file can fail without a message, which godal then
// reports as "unknown cpl error 3" (or "unknown error"); that is said in
// the user's words, as are the codec's own complaints about a block it
// could not read or decode (libtiff's "TIFFReadEncodedTile() failed", a
// driver's "IReadBlock failed", a decompressor's error).
func tidyRead(err error) error {
	if err == nil {
		return nil
	}
	var keep []string
	for _, l := range strings.Split(tidy(err).Error(), "; ") {
		if strings.HasPrefix(l, "unknown cpl error ") || l == "unknown error" || blockFailure(l) {
			l = "cannot read the data (the file is damaged or truncated)"
		}
		if !slices.Contains(keep, l) {
			keep = append(keep, l)
		}
	}
	return &tidyError{strings.Join(keep, "; "), err}
}

// blockFailure reports whether a GDAL message says that a block of a file
// could not be read or decoded.
func blockFailure(msg string) bool {
	for _, sign := range []string{"IReadBlock failed", "TIFFRead", "TIFFFill", "Read error at", "bytes, expected", "Decode:", "Decoding error", "decompress"} {
		if strings.Contains(msg, sign) {
			return true
		}
	}
	return false
}
