package transform

import (
	"errors"
	"fmt"
	"math"
	"strings"
)

// ErrBadType is wrapped by the error of NewStorage for a storage kind other
// than same, float32 or float64.
var ErrBadType = errors.New("want same, float32 or float64")

// integerRanges holds the value ranges of the GDAL integer types a band can
// be stored in.
var integerRanges = map[string][2]float64{
	"Byte": {0, 255}, "UInt16": {0, 65535}, "Int16": {-32768, 32767},
	"UInt32": {0, 4294967295}, "Int32": {-2147483648, 2147483647},
}

// Storage describes how reconstructed band values are stored in an image:
// the GDAL type, its range for integer types, the nodata value and, per
// band, the scale and offset of GDAL's convention
// physical = stored·Scale + Offset. Make one with NewStorage and convert
// values with Store.
type Storage struct {
	// DataType is the GDAL name of the storage type: one of the integer
	// types of integerRanges, "Float32" or "Float64".
	DataType string
	// Integer reports whether DataType is an integer type; Lo and Hi are
	// then its range (both 0 for floating-point types).
	Integer bool
	Lo, Hi  float64
	// NoData is the value written for invalid pixels: the first band's
	// nodata when the type can hold it (NaN included, for floating-point
	// types), NaN for floating-point types otherwise, and for an integer
	// type without a usable nodata an end of its range that no band reached
	// while fitting.
	NoData float64
	// Scale and Offset are those of each band for integer types (a zero
	// scale read as 1), and 1 and 0 for floating-point types, which hold
	// physical values directly.
	Scale, Offset []float64
	// Warning, when not empty, says on one line that no end of an integer
	// range was free for nodata, so invalid pixels share the type's minimum
	// with valid ones.
	Warning string
}

// NewStorage returns the storage of values reconstructed with b. kind, in
// any case, is "same" for the type of the original bands (Float32 when
// they differ, or when it is neither an integer type of integerRanges nor
// Float64), or "float32" or "float64". An unknown kind returns an error
// wrapping ErrBadType.
func NewStorage(b *Basis, kind string) (Storage, error) {
	st := Storage{}
	switch strings.ToLower(kind) {
	case "float32":
		st.DataType = "Float32"
	case "float64":
		st.DataType = "Float64"
	case "same":
		st.DataType = b.Bands[0].DataType
		for _, band := range b.Bands[1:] {
			if band.DataType != st.DataType {
				st.DataType = "Float32" // mixed types: one GeoTIFF type for all
			}
		}
	default:
		return st, fmt.Errorf("type %q: %w", kind, ErrBadType)
	}
	r, integer := integerRanges[st.DataType]
	if !integer && st.DataType != "Float32" && st.DataType != "Float64" {
		st.DataType = "Float32"
	}
	st.Integer, st.Lo, st.Hi = integer, r[0], r[1]
	st.NoData = math.NaN()
	if nd := b.Bands[0].NoData; nd != nil && (!integer || (*nd >= st.Lo && *nd <= st.Hi && *nd == math.Trunc(*nd))) {
		st.NoData = *nd
	} else if integer {
		// The original declared no usable nodata: reserve an end of the
		// type's range that no band reached while fitting.
		lowFree, highFree := true, true
		for _, band := range b.Bands {
			lowFree = lowFree && band.Min > st.Lo
			highFree = highFree && band.Max < st.Hi
		}
		switch {
		case lowFree:
			st.NoData = st.Lo
		case highFree:
			st.NoData = st.Hi
		default:
			st.NoData = st.Lo
			st.Warning = fmt.Sprintf("the original bands declare no nodata and span their whole type's range; invalid pixels are written as the type's minimum, %v", st.Lo)
		}
	}
	for _, band := range b.Bands {
		scale, off := band.Scale, band.Offset
		if scale == 0 {
			scale = 1
		}
		if !integer { // floats hold physical values directly
			scale, off = 1, 0
		}
		st.Scale = append(st.Scale, scale)
		st.Offset = append(st.Offset, off)
	}
	return st, nil
}

// Store converts the physical value v of band (0-based) into the value
// written, and returns it with the physical value that written value stands
// for. Floating-point types keep v (rounded to float32 for Float32). Integer
// types store round((v − Offset)/Scale), rounding half away from zero,
// clamped to [Lo, Hi] and moved one step inwards if it would equal NoData,
// so that no valid pixel reads as nodata.
func (st *Storage) Store(v float64, band int) (stored, physical float64) {
	if !st.Integer {
		if st.DataType == "Float32" {
			v = float64(float32(v))
		}
		return v, v
	}
	q := math.Round((v - st.Offset[band]) / st.Scale[band])
	q = max(st.Lo, min(st.Hi, q))
	if q == st.NoData { // keep valid pixels off nodata
		if q < st.Hi {
			q++
		} else {
			q--
		}
	}
	return q, q*st.Scale[band] + st.Offset[band]
}

// StorePixels stores the values of pixel-major pixels (len(st.Scale)
// bands each): valid pixels through Store, invalid ones as NoData. With
// physical not nil, it also receives the physical value each stored value
// stands for (left unset for invalid pixels).
func (st *Storage) StorePixels(stored, physical, values []float64, valid []bool) {
	p := len(st.Scale)
	for i, ok := range valid {
		for j := range p {
			at := i*p + j
			if !ok {
				stored[at] = st.NoData
				continue
			}
			s, ph := st.Store(values[at], j)
			stored[at] = s
			if physical != nil {
				physical[at] = ph
			}
		}
	}
}
