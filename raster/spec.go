package raster

import (
	"errors"
	"fmt"
	"math"
	"slices"
	"strconv"
	"strings"
)

// ErrBadSpec marks a malformed band list or nodata list given by the user.
var ErrBadSpec = errors.New("bad specification")

// maxBandNumber bounds band numbers and range sizes in a selection, far
// above any real sensor, so that a typo cannot ask for billions of bands.
const maxBandNumber = 100000

// ParseBands parses a 1-based band selection such as "1-5,7" into band
// numbers in the order given. Ranges run upwards ("3-1" is an error) and a
// band may not be selected twice. An empty string selects nothing (nil),
// which callers take as "all bands".
func ParseBands(spec string) ([]int, error) {
	spec = strings.TrimSpace(spec)
	if spec == "" {
		return nil, nil
	}
	var out []int
	seen := map[int]bool{}
	for _, part := range strings.Split(spec, ",") {
		part = strings.TrimSpace(part)
		if part == "" {
			return nil, specErr(ErrBadSpec, "bands %q: an empty item between commas", spec)
		}
		if strings.HasPrefix(part, "-") {
			return nil, specErr(ErrBadSpec, "bands %q: %s is not a band number (bands count from 1)", spec, part)
		}
		lo, hi, isRange := strings.Cut(part, "-")
		a, err := parseBandNumber(lo)
		if err != nil {
			return nil, fmt.Errorf("bands %q: %w", spec, err)
		}
		b := a
		if isRange {
			if b, err = parseBandNumber(hi); err != nil {
				return nil, fmt.Errorf("bands %q: %w", spec, err)
			}
			if b < a {
				return nil, specErr(ErrBadSpec, "bands %q: range %s runs backwards", spec, part)
			}
		}
		for n := a; n <= b; n++ {
			if seen[n] {
				return nil, specErr(ErrBadSpec, "bands %q: band %d selected twice", spec, n)
			}
			seen[n] = true
			out = append(out, n)
		}
	}
	return out, nil
}

func parseBandNumber(s string) (int, error) {
	s = strings.TrimSpace(s)
	n, err := strconv.Atoi(s)
	if err != nil {
		return 0, specErr(ErrBadSpec, "%q is not a band number", s)
	}
	if n < 1 || n > maxBandNumber {
		return 0, specErr(ErrBadSpec, "band %d out of range (bands count from 1)", n)
	}
	return n, nil
}

// ParseNoData parses "--nodata": one value for all bands or a comma list with
// one value per band. "nan" (in any case, with or without a sign) gives NaN,
// for float bands whose nodata is NaN; infinities are refused.
func ParseNoData(spec string) ([]float64, error) {
	spec = strings.TrimSpace(spec)
	if spec == "" {
		return nil, nil
	}
	var out []float64
	for _, part := range strings.Split(spec, ",") {
		part = strings.TrimSpace(part)
		v, err := parseNoDataValue(part)
		if err != nil {
			return nil, specErr(ErrBadSpec, "nodata %q: %q is not a number", spec, part)
		}
		out = append(out, v)
	}
	return out, nil
}

func parseNoDataValue(s string) (float64, error) {
	if strings.EqualFold(strings.TrimLeft(s, "+-"), "nan") && len(s) <= 4 {
		return math.NaN(), nil
	}
	v, err := strconv.ParseFloat(s, 64)
	if err != nil || math.IsInf(v, 0) || math.IsNaN(v) {
		return 0, ErrBadSpec
	}
	return v, nil
}

// resamplings are the gdalwarp -r names accepted for warping a stack onto
// one grid.
var resamplings = []string{"nearest", "bilinear", "cubic", "cubicspline", "lanczos", "average", "mode"}

// ParseResampling checks a resampling name for AlignStack and AlignMasks:
// one of nearest, bilinear, cubic, cubicspline, lanczos, average, mode (any
// case; gdalwarp's "near" is taken as nearest). It returns the name in lower
// case.
func ParseResampling(s string) (string, error) {
	name := strings.ToLower(strings.TrimSpace(s))
	if name == "near" {
		name = "nearest"
	}
	if !slices.Contains(resamplings, name) {
		return "", specErr(ErrBadSpec, "resampling %q: want one of %s", s, strings.Join(resamplings, ", "))
	}
	return name, nil
}

// Calibrations of Calibrate.
const (
	CalibrateScale       = "scale"
	CalibrateTOA         = "toa"
	CalibrateReflectance = "reflectance"
)

// Calibrations lists the calibration modes, in the order help texts give
// them.
var Calibrations = []string{CalibrateScale, CalibrateTOA, CalibrateReflectance}

// ParseCalibration checks a calibration mode for Calibrate: "scale", "toa"
// or "reflectance" (any case). It returns the name in lower case.
func ParseCalibration(s string) (string, error) {
	name := strings.ToLower(strings.TrimSpace(s))
	if !slices.Contains(Calibrations, name) {
		return "", specErr(ErrBadSpec, "calibration %q: want %s", s, strings.Join(Calibrations, ", "))
	}
	return name, nil
}

// specError is a refused specification: its message says what is wrong,
// and it matches its sentinel (ErrBadSpec or ErrBandRange) with errors.Is
// without repeating the sentinel's text.
type specError struct {
	msg  string
	kind error
}

func (e *specError) Error() string { return e.msg }
func (e *specError) Unwrap() error { return e.kind }

// specErr returns a specError of kind with a formatted message.
func specErr(kind error, format string, args ...any) error {
	return &specError{fmt.Sprintf(format, args...), kind}
}
