package raster

/*
#include <gdal.h>
#include <ogr_api.h>
*/
import "C"

import (
	"unsafe"

	"github.com/airbusgeo/godal"
)

// bandHandle returns the GDAL band handle behind a godal.Band. godal (v0.0.18,
// pinned in go.mod) keeps it as the struct's only field and offers no getter
// for band scale and offset, so this reads it directly; the size assertion
// below stops the build if that layout ever changes.
func bandHandle(b godal.Band) C.GDALRasterBandH {
	return *(*C.GDALRasterBandH)(unsafe.Pointer(&b))
}

var _ [unsafe.Sizeof(godal.Band{}) - unsafe.Sizeof(uintptr(0))]struct{}
var _ [unsafe.Sizeof(uintptr(0)) - unsafe.Sizeof(godal.Band{})]struct{}

// geometryMirror has the layout of godal.Geometry: an ownership flag, then
// the OGR handle.
type geometryMirror struct {
	owned  bool
	handle C.OGRGeometryH
}

// geometryHandle returns the OGR handle behind a godal.Geometry, which
// offers no Segmentize.
func geometryHandle(g *godal.Geometry) C.OGRGeometryH {
	return (*geometryMirror)(unsafe.Pointer(g)).handle
}

var _ [unsafe.Sizeof(godal.Geometry{}) - unsafe.Sizeof(geometryMirror{})]struct{}
var _ [unsafe.Sizeof(geometryMirror{}) - unsafe.Sizeof(godal.Geometry{})]struct{}

// bandScaleOffset returns the band's scale and offset metadata (1 and 0 when
// absent).
func bandScaleOffset(b godal.Band) (scale, offset float64) {
	h := bandHandle(b)
	var ok C.int
	scale = float64(C.GDALGetRasterScale(h, &ok))
	if ok == 0 || scale == 0 {
		scale = 1
	}
	offset = float64(C.GDALGetRasterOffset(h, &ok))
	if ok == 0 {
		offset = 0
	}
	return scale, offset
}
