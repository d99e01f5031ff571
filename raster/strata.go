package raster

/*
#include <stdlib.h>
#include <cpl_conv.h>
#include <cpl_error.h>
#include <cpl_string.h>
#include <gdal_alg.h>

// bandfoldProximity marks with 1, in dst, every pixel within maxDist pixels
// of a pixel of value 1 in src (GDAL's proximity with a fixed buffer
// value); on failure *msg holds GDAL's message (free it with VSIFree).
static int bandfoldProximity(GDALRasterBandH src, GDALRasterBandH dst, double maxDist, char **msg) {
	char dist[64];
	CPLsnprintf(dist, sizeof dist, "MAXDIST=%.17g", maxDist);
	char **opts = NULL;
	opts = CSLAddString(opts, "VALUES=1");
	opts = CSLAddString(opts, "DISTUNITS=PIXEL");
	opts = CSLAddString(opts, dist);
	opts = CSLAddString(opts, "FIXED_BUF_VAL=1");
	opts = CSLAddString(opts, "NODATA=0");
	CPLPushErrorHandler(CPLQuietErrorHandler);
	CPLErrorReset();
	CPLErr err = GDALComputeProximity(src, dst, opts, NULL, NULL);
	if (err != CE_None) {
		*msg = CPLStrdup(CPLGetLastErrorMsg());
	}
	CPLPopErrorHandler();
	CSLDestroy(opts);
	return err;
}
*/
import "C"

import (
	"errors"
	"fmt"
	"math"
	"unsafe"
)

// Strata of a survey of a change map.
const (
	StratumNoChange   uint8 = 0
	StratumChange     uint8 = 1
	StratumNearChange uint8 = 2 // no change within the buffer of change
	StratumNone       uint8 = 255
)

// Buffer is the width of the near-change stratum: Value pixels, or metres
// on the ground when Metres is set; 0 means no such stratum.
type Buffer struct {
	Value  float64
	Metres bool
}

// Strata is a classified map read for a survey: every pixel's stratum,
// row by row, and each stratum's pixel count and area (m² when Ground,
// else pixels). It holds W*H bytes.
type Strata struct {
	Grid
	Codes  []uint8
	Counts [3]int
	Areas  [3]float64
	Ground bool
	// BufferPixels is the buffer width in pixels actually used.
	BufferPixels float64
	areas        *CellAreas
}

// ReadStrata reads band 1 of the classified map at path (0 no change, any
// other value change; the band's nodata value and 255 are outside the map)
// into strata, with a near-change stratum of the no-change pixels within
// buf of change (GDAL's proximity, measured between pixel centres). A
// buffer in metres needs a CRS: without one the error wraps ErrNoCRS.
func ReadStrata(path string, buf Buffer) (*Strata, error) {
	ds, err := openDataset(path)
	if err != nil {
		return nil, fmt.Errorf("map %w", err)
	}
	defer ds.Close(errLogger)
	g := gridOf(ds)
	s := &Strata{Grid: g, Codes: make([]uint8, g.Width*g.Height)}
	band := ds.Bands()[0]
	nd, hasND := band.NoData()
	vals := make([]float64, g.Width*min(g.Height, 256))
	for y := 0; y < g.Height; y += 256 {
		h := min(256, g.Height-y)
		if err := band.Read(0, y, vals[:g.Width*h], g.Width, h, errLogger); err != nil {
			return nil, fmt.Errorf("read %s: %w", path, tidyRead(err))
		}
		for i, v := range vals[:g.Width*h] {
			c := StratumChange
			switch {
			case math.IsNaN(v) || v == 255 || (hasND && v == nd):
				c = StratumNone
			case v == 0:
				c = StratumNoChange
			}
			s.Codes[y*g.Width+i] = c
		}
	}
	s.areas, err = NewCellAreas(g)
	switch {
	case errors.Is(err, ErrNoCRS):
		if buf.Metres && buf.Value > 0 {
			return nil, fmt.Errorf("map %s has no CRS, so a buffer in metres cannot be measured: give it in px (%w)", path, ErrNoCRS)
		}
		s.areas = nil
	case err != nil:
		return nil, fmt.Errorf("map %s: %w", path, err)
	default:
		s.Ground = true
	}
	s.BufferPixels = buf.Value
	if buf.Metres && s.areas != nil {
		s.BufferPixels = buf.Value / math.Sqrt(s.areas.Mean())
	}
	if s.BufferPixels > 0 {
		if err := s.nearChange(); err != nil {
			return nil, fmt.Errorf("buffer of %s: %w", path, err)
		}
	}
	for i, c := range s.Codes {
		if c == StratumNone {
			continue
		}
		s.Counts[c]++
		if s.areas != nil {
			s.Areas[c] += s.areas.At(i%g.Width, i/g.Width)
		} else {
			s.Areas[c]++
		}
	}
	return s, nil
}

// nearChange turns no-change pixels within BufferPixels of change into
// StratumNearChange.
func (s *Strata) nearChange() error {
	ds, err := newMem(s.Grid, 2)
	if err != nil {
		return err
	}
	defer ds.Close(errLogger)
	bands := ds.Bands()
	src := make([]uint8, len(s.Codes))
	for i, c := range s.Codes {
		if c == StratumChange {
			src[i] = 1
		}
	}
	if err := bands[0].Write(0, 0, src, s.Width, s.Height, errLogger); err != nil {
		return err
	}
	var msg *C.char
	if C.bandfoldProximity(bandHandle(bands[0]), bandHandle(bands[1]), C.double(s.BufferPixels), &msg) != C.CE_None {
		defer C.VSIFree(unsafe.Pointer(msg))
		return fmt.Errorf("proximity: %s", C.GoString(msg))
	}
	if err := bands[1].Read(0, 0, src, s.Width, s.Height, errLogger); err != nil {
		return err
	}
	for i, near := range src {
		if near == 1 && s.Codes[i] == StratumNoChange {
			s.Codes[i] = StratumNearChange
		}
	}
	return nil
}

// Pixels returns the positions (pixel index row by row) of the pixels of
// stratum c whose ranks among that stratum's pixels in raster order are
// ranks (ascending).
func (s *Strata) Pixels(c uint8, ranks []int) []int {
	out := make([]int, 0, len(ranks))
	rank, next := 0, 0
	for i, v := range s.Codes {
		if next == len(ranks) {
			break
		}
		if v != c {
			continue
		}
		if rank == ranks[next] {
			out = append(out, i)
			next++
		}
		rank++
	}
	return out
}

// Area returns the ground area (m²) of pixel i, or 1 without a CRS.
func (s *Strata) Area(i int) float64 {
	if s.areas == nil {
		return 1
	}
	return s.areas.At(i%s.Width, i/s.Width)
}
