package raster

import (
	"errors"
	"fmt"
	"math"
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
				return nil, fmt.Errorf("bands %q: range %s runs backwards: %w", spec, part, ErrBadSpec)
			}
		}
		for n := a; n <= b; n++ {
			if seen[n] {
				return nil, fmt.Errorf("bands %q: band %d selected twice: %w", spec, n, ErrBadSpec)
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
		return 0, fmt.Errorf("%q is not a band number: %w", s, ErrBadSpec)
	}
	if n < 1 || n > maxBandNumber {
		return 0, fmt.Errorf("band %d out of range (bands count from 1): %w", n, ErrBadSpec)
	}
	return n, nil
}

// ParseNoData parses "--nodata": one value for all bands or a comma list with
// one value per band. "nan" is accepted.
func ParseNoData(spec string) ([]float64, error) {
	spec = strings.TrimSpace(spec)
	if spec == "" {
		return nil, nil
	}
	var out []float64
	for _, part := range strings.Split(spec, ",") {
		v, err := strconv.ParseFloat(strings.TrimSpace(part), 64)
		if err != nil || math.IsInf(v, 0) {
			return nil, fmt.Errorf("nodata %q: %q is not a number: %w", spec, strings.TrimSpace(part), ErrBadSpec)
		}
		out = append(out, v)
	}
	return out, nil
}
