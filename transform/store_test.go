package transform

import (
	"errors"
	"math"
	"testing"
)

// storageBasis returns a basis whose bands have the given types, the first
// nodata nd (nil for none) and every band the valid range [lo, hi], scale 0.5
// and offset 10. NewStorage reads only the bands.
func storageBasis(types []string, nd *float64, lo, hi float64) *Basis {
	b := &Basis{}
	for j, dt := range types {
		bd := Band{Name: "B", Source: "s.tif", Index: j + 1, DataType: dt, Scale: 0.5, Offset: 10, Min: lo, Max: hi}
		if j == 0 {
			bd.NoData = nd
		}
		b.Bands = append(b.Bands, bd)
	}
	return b
}

func TestNewStorage(t *testing.T) {
	nan := math.NaN()
	// The integer ranges are those of GDAL's data types (gdal.h, GDALDataType).
	for _, tc := range []struct {
		name    string
		types   []string
		nd      *float64
		lo, hi  float64 // fitted band range
		kind    string
		dtype   string
		integer bool
		tlo     float64
		thi     float64
		nodata  float64
		warn    bool
		scale   float64
	}{
		{"Int16 with nodata", []string{"Int16", "Int16"}, new(-9999.0), -500, 9000, "same", "Int16", true, -32768, 32767, -9999, false, 0.5},
		{"Byte without nodata, low end free", []string{"Byte"}, nil, 1, 255, "Same", "Byte", true, 0, 255, 0, false, 0.5},
		{"Byte without nodata, high end free", []string{"Byte"}, nil, 0, 254, "same", "Byte", true, 0, 255, 255, false, 0.5},
		{"Byte spanning its range", []string{"Byte"}, nil, 0, 255, "same", "Byte", true, 0, 255, 0, true, 0.5},
		{"Byte with nodata out of range", []string{"Byte"}, new(300.0), 0, 254, "same", "Byte", true, 0, 255, 255, false, 0.5},
		{"UInt16 with fractional nodata", []string{"UInt16"}, new(1.5), 3, 60000, "same", "UInt16", true, 0, 65535, 0, false, 0.5},
		{"Int16 with NaN nodata", []string{"Int16"}, &nan, -32768, 100, "same", "Int16", true, -32768, 32767, 32767, false, 0.5},
		{"UInt32", []string{"UInt32"}, new(0.0), 1, 5, "same", "UInt32", true, 0, 4294967295, 0, false, 0.5},
		{"Int32", []string{"Int32"}, nil, 0, 5, "same", "Int32", true, -2147483648, 2147483647, -2147483648, false, 0.5},
		{"mixed types", []string{"Int16", "UInt16"}, new(-9999.0), 0, 1, "same", "Float32", false, 0, 0, -9999, false, 1},
		{"complex type", []string{"CInt16"}, nil, 0, 1, "same", "Float32", false, 0, 0, nan, false, 1},
		{"Float64 kept", []string{"Float64"}, nil, 0, 1, "same", "Float64", false, 0, 0, nan, false, 1},
		{"Float32 with NaN nodata", []string{"Float32"}, &nan, 0, 1, "same", "Float32", false, 0, 0, nan, false, 1},
		{"float32 asked", []string{"Int16"}, new(-9999.0), 0, 1, "FLOAT32", "Float32", false, 0, 0, -9999, false, 1},
		{"float64 asked, NaN nodata", []string{"Int16"}, &nan, 0, 1, "float64", "Float64", false, 0, 0, nan, false, 1},
	} {
		t.Run(tc.name, func(t *testing.T) {
			st, err := NewStorage(storageBasis(tc.types, tc.nd, tc.lo, tc.hi), tc.kind)
			if err != nil {
				t.Fatal(err)
			}
			sameNoData := st.NoData == tc.nodata || (math.IsNaN(st.NoData) && math.IsNaN(tc.nodata))
			if st.DataType != tc.dtype || st.Integer != tc.integer || st.Lo != tc.tlo || st.Hi != tc.thi || !sameNoData {
				t.Errorf("storage %s integer %v range [%v, %v] nodata %v; want %s %v [%v, %v] %v",
					st.DataType, st.Integer, st.Lo, st.Hi, st.NoData, tc.dtype, tc.integer, tc.tlo, tc.thi, tc.nodata)
			}
			if (st.Warning != "") != tc.warn {
				t.Errorf("warning %q, want one: %v", st.Warning, tc.warn)
			}
			wantOff := 10.0
			if !tc.integer {
				wantOff = 0 // floats hold physical values
			}
			for j := range tc.types {
				if st.Scale[j] != tc.scale || st.Offset[j] != wantOff {
					t.Errorf("band %d: scale %v offset %v, want %v and %v", j, st.Scale[j], st.Offset[j], tc.scale, wantOff)
				}
			}
		})
	}
	_, err := NewStorage(storageBasis([]string{"Int16"}, nil, 0, 1), "int16")
	if !errors.Is(err, ErrBadType) || err.Error() != `type "int16": want same, float32 or float64` {
		t.Errorf("unknown kind: %v", err)
	}
	// A zero scale is read as 1.
	b := storageBasis([]string{"Int16"}, nil, 0, 1)
	b.Bands[0].Scale = 0
	if st, err := NewStorage(b, "same"); err != nil || st.Scale[0] != 1 {
		t.Errorf("zero scale: %v, %v", st.Scale, err)
	}
}

func TestStore(t *testing.T) {
	// Int16, scale 0.5, offset 10, nodata -9999 (stored): every expected
	// value is worked by hand from round((v − 10)/0.5), half away from zero.
	st, err := NewStorage(storageBasis([]string{"Int16"}, new(-9999.0), -100, 100), "same")
	if err != nil {
		t.Fatal(err)
	}
	for _, tc := range []struct {
		v, stored, physical float64
	}{
		{12.3, 5, 12.5},                         // 4.6 rounds to 5
		{10.25, 1, 10.5},                        // 0.5 rounds away from zero
		{9.75, -1, 9.5},                         // −0.5 rounds away from zero
		{10, 0, 10},                             // exact
		{1e9, 32767, 32767*0.5 + 10},            // clamped to the type's maximum
		{-1e9, -32768, -32768*0.5 + 10},         // clamped to the type's minimum
		{-9999*0.5 + 10, -9998, -9998*0.5 + 10}, // would be nodata: one step up
	} {
		stored, physical := st.Store(tc.v, 0)
		if stored != tc.stored || physical != tc.physical {
			t.Errorf("Store(%v) = %v, %v; want %v, %v", tc.v, stored, physical, tc.stored, tc.physical)
		}
	}

	// The reserved end of the range: a Byte band without nodata that never
	// reached 0 keeps 0 for nodata, and a valid value rounding to 0 is
	// written as 1; when 255 is reserved, values clamped to 255 become 254.
	low, err := NewStorage(storageBasis([]string{"Byte"}, nil, 3, 255), "same")
	if err != nil {
		t.Fatal(err)
	}
	if stored, physical := low.Store(-50, 0); low.NoData != 0 || stored != 1 || physical != 10.5 {
		t.Errorf("low end reserved: nodata %v, Store(-50) = %v, %v; want 0, 1, 10.5", low.NoData, stored, physical)
	}
	high, err := NewStorage(storageBasis([]string{"Byte"}, nil, 0, 200), "same")
	if err != nil {
		t.Fatal(err)
	}
	if stored, _ := high.Store(1e6, 0); high.NoData != 255 || stored != 254 {
		t.Errorf("high end reserved: nodata %v, Store(1e6) = %v; want 255, 254", high.NoData, stored)
	}

	// Floating-point storage keeps physical values: rounded to float32, or
	// exact for Float64, NaN included.
	f32, err := NewStorage(storageBasis([]string{"Int16"}, nil, 0, 1), "float32")
	if err != nil {
		t.Fatal(err)
	}
	if stored, physical := f32.Store(0.1, 0); stored != float64(float32(0.1)) || physical != stored {
		t.Errorf("Float32 Store(0.1) = %v, %v; want %v", stored, physical, float64(float32(0.1)))
	}
	f64, err := NewStorage(storageBasis([]string{"Int16"}, nil, 0, 1), "float64")
	if err != nil {
		t.Fatal(err)
	}
	if stored, physical := f64.Store(0.1, 0); stored != 0.1 || physical != 0.1 {
		t.Errorf("Float64 Store(0.1) = %v, %v; want 0.1", stored, physical)
	}
	if stored, _ := f64.Store(math.NaN(), 0); !math.IsNaN(stored) {
		t.Errorf("Float64 Store(NaN) = %v, want NaN", stored)
	}
}
