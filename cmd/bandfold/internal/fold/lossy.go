package fold

import (
	"strconv"
	"strings"

	"bandfold/raster"
)

// lossyCreation says why the creation options opts (--co, as the user gave
// them: a later KEY replaces an earlier one, keys in any case) make the
// driver of format store other values than those written, or returns ""
// when they keep every value. A budgeted fold proves its error on the codes
// it hands to GDAL, so a codec that changes them afterwards breaks the
// proof. The rules follow the GeoTIFF and COG drivers' documentation
// (GDAL 3.6, gdal.org/drivers/raster/gtiff.html and cog.html):
//
//   - COMPRESS=JPEG is always lossy;
//   - COMPRESS=WEBP is lossy unless WEBP_LOSSLESS is true (GeoTIFF) or
//     QUALITY=100 (COG, which then turns lossless mode on);
//   - COMPRESS=LERC, LERC_DEFLATE and LERC_ZSTD are lossy when MAX_Z_ERROR
//     is above its default 0;
//   - COMPRESS=JXL is lossy when JXL_LOSSLESS is false;
//   - NBITS (fewer bits, or half floats) and DISCARD_LSB (cleared low bits)
//     drop precision whatever the compression (GeoTIFF only).
func lossyCreation(format raster.Format, opts []string) string {
	co := map[string]string{}
	given := map[string]string{}
	for _, kv := range opts {
		k, v, _ := strings.Cut(kv, "=")
		key := strings.ToUpper(strings.TrimSpace(k))
		co[key], given[key] = strings.ToUpper(strings.TrimSpace(v)), kv
	}
	switch c := co["COMPRESS"]; {
	case c == "JPEG":
		return given["COMPRESS"] + " is lossy"
	case c == "WEBP" && format == raster.COG && co["QUALITY"] != "100":
		return given["COMPRESS"] + " is lossy unless QUALITY=100"
	case c == "WEBP" && format != raster.COG && !gdalTrue(co["WEBP_LOSSLESS"]):
		return given["COMPRESS"] + " is lossy unless WEBP_LOSSLESS=YES"
	case strings.HasPrefix(c, "LERC") && co["MAX_Z_ERROR"] != "" && !isZero(co["MAX_Z_ERROR"]):
		return given["MAX_Z_ERROR"] + " makes " + given["COMPRESS"] + " lossy (only MAX_Z_ERROR=0 keeps every value)"
	case c == "JXL" && co["JXL_LOSSLESS"] != "" && !gdalTrue(co["JXL_LOSSLESS"]):
		return given["JXL_LOSSLESS"] + " makes " + given["COMPRESS"] + " lossy"
	}
	for _, key := range []string{"NBITS", "DISCARD_LSB"} {
		if v, ok := co[key]; ok && format != raster.COG && !(key == "DISCARD_LSB" && allZero(v)) {
			return given[key] + " drops precision from the values stored"
		}
	}
	return ""
}

// gdalTrue reports whether a creation option's value is true as GDAL's
// CPLTestBool reads it: anything but NO, FALSE, OFF and 0 (and, here, no
// value at all, which leaves the driver's default false).
func gdalTrue(v string) bool {
	switch v {
	case "", "NO", "FALSE", "OFF", "0":
		return false
	}
	return true
}

// allZero reports whether every item of the comma-separated list v is a
// number equal to zero.
func allZero(v string) bool {
	for _, item := range strings.Split(v, ",") {
		if !isZero(strings.TrimSpace(item)) {
			return false
		}
	}
	return true
}

// isZero reports whether v is a number equal to zero.
func isZero(v string) bool {
	x, err := strconv.ParseFloat(v, 64)
	return err == nil && x == 0
}
