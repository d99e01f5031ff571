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
// pinned in go.mod) keeps it as the struct's only field and offers no
// cancellable sieve (GDALSieveFilter with a progress callback, used by
// patches.go), so this reads it directly; the size assertion below stops the
// build if that layout ever changes.
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
