package raster

import (
	"fmt"
	"math"
	"slices"
	"strconv"
	"strings"
)

// MaskRule says which pixels of a quality mask file (its band 1) are valid.
// With neither Bits nor Values, a pixel is valid where the mask is non-zero.
// With Bits, it is invalid where any of those bits is set; with Values,
// where the mask value lies in one of the ranges. Under every rule, a mask
// pixel that is NaN or equal to the mask band's own nodata value is
// invalid: its quality is unknown.
type MaskRule struct {
	Path string
	// Bits are bit numbers, 0 the least significant, ascending without
	// repeats. They need an integer mask band.
	Bits []int
	// Values are inclusive ranges of mask values (Lo == Hi for one value).
	Values []ValueRange
}

// ValueRange is an inclusive range of mask values.
type ValueRange struct{ Lo, Hi float64 }

// maxValueText bounds the text of one value or range in a value list.
const maxValueText = 100

// maxMaskBit is the highest bit number a bit rule may name.
const maxMaskBit = 63

// ParseMask parses a mask argument: "FILE" (non-zero = valid),
// "FILE:bits=0-4,9" (invalid where any listed bit is set; bits from 0, the
// least significant, to 63), "FILE:values=0,3,8-10" (invalid where the
// value is listed; ranges are inclusive), or a product's quality names:
// "FILE:qa_pixel=fill,cloud,cloud_shadow" for a Landsat Collection 2
// QA_PIXEL band, "FILE:scl=cloud_shadows,cloud_high_probability" for a
// Sentinel-2 Level-2A SCL layer (see qualitynames.go), which stand for the
// bits= and values= rules of the product guides. Only the last ":KEY="
// splits the argument, so paths holding ':' (GDAL's /vsi paths, drive
// letters) keep working. Errors wrap ErrBadSpec.
func ParseMask(spec string) (MaskRule, error) {
	spec = strings.TrimSpace(spec)
	at, key := -1, ""
	for _, k := range []string{"bits", "values", "qa_pixel", "scl"} {
		if i := strings.LastIndex(spec, ":"+k+"="); i > at {
			at, key = i, k
		}
	}
	var r MaskRule
	var err error
	r.Path = spec
	if at >= 0 {
		r.Path = spec[:at]
		list := spec[at+len(key)+2:]
		switch key {
		case "bits":
			r.Bits, err = parseBits(list)
		case "values":
			r.Values, err = parseValues(list)
		default:
			r.Bits, r.Values, err = namedRule(key, list)
		}
	}
	if err != nil {
		return MaskRule{}, fmt.Errorf("mask %q: %w", spec, err)
	}
	if strings.TrimSpace(r.Path) == "" {
		return MaskRule{}, specErr(ErrBadSpec, "mask %q: no file", spec)
	}
	return r, nil
}

func parseBits(list string) ([]int, error) {
	if strings.TrimSpace(list) == "" {
		return nil, specErr(ErrBadSpec, "empty bit list")
	}
	var set uint64
	for _, part := range strings.Split(list, ",") {
		part = strings.TrimSpace(part)
		lo, hi, isRange := strings.Cut(part, "-")
		a, err := parseBit(lo)
		if err != nil {
			return nil, err
		}
		b := a
		if isRange {
			if b, err = parseBit(hi); err != nil {
				return nil, err
			}
			if b < a {
				return nil, specErr(ErrBadSpec, "bit range %s runs backwards", part)
			}
		}
		for n := a; n <= b; n++ {
			set |= 1 << n
		}
	}
	return bitList(set), nil
}

func parseBit(s string) (int, error) {
	s = strings.TrimSpace(s)
	n, err := strconv.Atoi(s)
	if err != nil {
		return 0, specErr(ErrBadSpec, "%q is not a bit number", shorten(s))
	}
	if n < 0 || n > maxMaskBit {
		return 0, specErr(ErrBadSpec, "bit %d out of range (bits count from 0, the least significant, to %d)", n, maxMaskBit)
	}
	return n, nil
}

func bitList(set uint64) []int {
	var out []int
	for n := range maxMaskBit + 1 {
		if set&(1<<n) != 0 {
			out = append(out, n)
		}
	}
	return out
}

func parseValues(list string) ([]ValueRange, error) {
	if strings.TrimSpace(list) == "" {
		return nil, specErr(ErrBadSpec, "empty value list")
	}
	var out []ValueRange
	for _, part := range strings.Split(list, ",") {
		part = strings.TrimSpace(part)
		r, ok := parseValueRange(part)
		if !ok {
			return nil, specErr(ErrBadSpec, "%q is not a number or a range of numbers", shorten(part))
		}
		if r.Hi < r.Lo {
			return nil, specErr(ErrBadSpec, "value range %s runs backwards", part)
		}
		out = append(out, r)
	}
	return out, nil
}

// parseValueRange parses "v" or "lo-hi"; numbers may be negative
// ("-5--3") or have exponents ("1e-3-2"). Parts longer than maxValueText
// are refused (they are no numbers, and each '-' is tried as the split).
func parseValueRange(s string) (ValueRange, bool) {
	if len(s) > maxValueText {
		return ValueRange{}, false
	}
	if v, ok := parseFinite(s); ok {
		return ValueRange{v, v}, true
	}
	for i := 1; i < len(s); i++ {
		if s[i] != '-' {
			continue
		}
		lo, ok1 := parseFinite(strings.TrimSpace(s[:i]))
		hi, ok2 := parseFinite(strings.TrimSpace(s[i+1:]))
		if ok1 && ok2 {
			return ValueRange{lo, hi}, true
		}
	}
	return ValueRange{}, false
}

func parseFinite(s string) (float64, bool) {
	v, err := strconv.ParseFloat(s, 64)
	return v, err == nil && !math.IsNaN(v) && !math.IsInf(v, 0)
}

// String gives the rule back in the form ParseMask reads.
func (r MaskRule) String() string {
	switch {
	case len(r.Bits) > 0:
		var parts []string
		for i := 0; i < len(r.Bits); {
			j := i
			for j+1 < len(r.Bits) && r.Bits[j+1] == r.Bits[j]+1 {
				j++
			}
			if j > i {
				parts = append(parts, fmt.Sprintf("%d-%d", r.Bits[i], r.Bits[j]))
			} else {
				parts = append(parts, strconv.Itoa(r.Bits[i]))
			}
			i = j + 1
		}
		return r.Path + ":bits=" + strings.Join(parts, ",")
	case len(r.Values) > 0:
		parts := make([]string, len(r.Values))
		for i, v := range r.Values {
			parts[i] = ftoa(v.Lo)
			if v.Hi != v.Lo {
				parts[i] += "-" + ftoa(v.Hi)
			}
		}
		return r.Path + ":values=" + strings.Join(parts, ",")
	}
	return r.Path
}

// maskTest is a MaskRule prepared for one mask band.
type maskTest struct {
	bits   uint64 // bits that make a pixel invalid
	width  uint64 // the band's bits: values are two's complement in them
	values []ValueRange
	nodata float64
	hasND  bool
}

// newMaskTest checks rule r against its mask band's data type and nodata
// (from the file itself, before any warp) and prepares it.
func newMaskTest(r MaskRule, dataType string, nodata float64, hasND bool) (maskTest, error) {
	m := maskTest{values: r.Values, nodata: nodata, hasND: hasND && !math.IsNaN(nodata)}
	if isComplex(dataType) {
		return m, complexErr("mask: ", r.Path, 1, dataType)
	}
	if len(r.Bits) == 0 {
		return m, nil
	}
	width := integerBits(dataType)
	if width == 0 {
		return m, specErr(ErrBadSpec, "mask %s: bit rules need an integer band, band 1 is %s", r.Path, dataType)
	}
	exact := width
	if width == 64 {
		exact = 53 // read through float64, exact below 2^53
	}
	for _, b := range r.Bits {
		if b >= exact {
			return m, specErr(ErrBadSpec, "mask %s: bit %d is beyond the %d bits of its %s band 1", r.Path, b, exact, dataType)
		}
		m.bits |= 1 << b
	}
	m.width = math.MaxUint64
	if width < 64 {
		m.width = 1<<width - 1
	}
	return m, nil
}

// valid reports whether mask value v lets its pixel through.
func (m *maskTest) valid(v float64) bool {
	switch {
	case v != v || (m.hasND && v == m.nodata):
		return false
	case m.bits != 0:
		return uint64(int64(v))&m.width&m.bits == 0
	case m.values != nil:
		for _, r := range m.values {
			if v >= r.Lo && v <= r.Hi {
				return false
			}
		}
		return true
	}
	return v != 0
}

// integerBits returns the width of a GDAL integer type, 0 for other types.
func integerBits(dataType string) int {
	switch dataType {
	case "Byte", "Int8":
		return 8
	case "Int16", "UInt16":
		return 16
	case "Int32", "UInt32":
		return 32
	case "Int64", "UInt64":
		return 64
	}
	return 0
}

// maskResampling checks the resampling used to warp masks: masks hold codes,
// which only nearest neighbour and mode keep.
func maskResampling(s string) (string, error) {
	name, err := ParseResampling(s)
	if err != nil {
		return "", fmt.Errorf("mask %w", err)
	}
	if !slices.Contains([]string{"nearest", "mode"}, name) {
		return "", specErr(ErrBadSpec, "mask resampling %s: masks hold codes, warp them with nearest or mode", name)
	}
	return name, nil
}
