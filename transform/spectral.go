package transform

import (
	"bytes"
	"errors"
	"fmt"
	"math"
	"slices"
	"strconv"
	"strings"
)

// unitScale returns the factor turning a wavelength in unit u into
// nanometres: "nm" 1, "um" (also "µm", "micrometers", "microns") 1000.
func unitScale(u string) (float64, bool) {
	switch strings.ToLower(strings.TrimSpace(u)) {
	case "nm", "nanometer", "nanometers", "nanometre", "nanometres":
		return 1, true
	case "um", "µm", "μm", "micrometer", "micrometers", "micrometre", "micrometres", "micron", "microns":
		return 1000, true
	}
	return 0, false
}

// MinNM and MaxNM bound the band centre wavelengths bandfold accepts, in
// nanometres: 0.1 to 100 micrometres, from the ultraviolet to beyond the
// thermal infrared, wider than any imaging sensor's bands. A value outside
// is a unit mistake: micrometres (0.45) written under nanometres, or
// nanometres (450) under micrometres.
const (
	MinNM = 100
	MaxNM = 100000
)

// WavelengthToNM converts a wavelength v given in unit ("nm", "um", ...;
// case-insensitive) to nanometres. A result outside [MinNM, MaxNM] is
// refused as a unit that contradicts the value.
func WavelengthToNM(v float64, unit string) (float64, error) {
	f, ok := unitScale(unit)
	if !ok {
		return 0, fmt.Errorf("unknown wavelength unit %q (want nm or um)", shorten(unit))
	}
	return toNM(v, f, unit)
}

// toNM is v times scale (1 for nm, 1000 for um), checked against [MinNM,
// MaxNM]; unit names the unit as the user wrote it.
func toNM(v, scale float64, unit string) (float64, error) {
	nm := v * scale
	switch {
	case nm < MinNM && scale == 1:
		return 0, fmt.Errorf("%g %s is below %d nm: are the values in micrometres? (say um in the header or after the value)", v, unit, MinNM)
	case nm > MaxNM && scale != 1:
		return 0, fmt.Errorf("%g %s is above %d um: are the values in nanometres? (say nm in the header or after the value)", v, unit, MaxNM/1000)
	case nm < MinNM || nm > MaxNM:
		return 0, fmt.Errorf("%g %s is outside %d nm to %d um", v, unit, MinNM, MaxNM/1000)
	}
	return nm, nil
}

// headerUnit finds the unit named in a column header such as
// "wavelength_nm", "wavelength (um)" or "nm".
func headerUnit(h string) (float64, bool) {
	h = strings.ToLower(h)
	for _, sep := range []string{"(", "[", "_", " "} {
		if i := strings.LastIndex(h, sep); i >= 0 {
			if f, ok := unitScale(strings.Trim(h[i+1:], ")] ")); ok {
				return f, true
			}
		}
	}
	return unitScale(h)
}

// ParseWavelengths reads band centre wavelengths from a text file's
// content and returns them in nanometres. The file holds one value per line,
// or a CSV table with a header; blank lines and lines starting with # are
// skipped. The unit is required: a header naming it ("wavelength_nm",
// "wavelength (um)", "nm"), which for a table also picks the column (the one
// whose header names a unit and contains "wavelength", else the only one
// naming a unit), or a unit after each value ("450 nm", "0.45um"). The
// values must be finite, positive and strictly increasing; the caller
// checks their count against the bands.
func ParseWavelengths(data []byte) ([]float64, error) {
	var out []float64
	col, scale, unit, columns := -1, 0.0, "", 0
	data = bytes.TrimPrefix(data, []byte("\ufeff")) // a spreadsheet's byte-order mark
	for i, raw := range bytes.Split(data, []byte("\n")) {
		line := i + 1
		text := strings.TrimSpace(string(raw))
		if text == "" || strings.HasPrefix(text, "#") {
			continue
		}
		fields := strings.Split(text, ",")
		if col < 0 && len(out) == 0 && scale == 0 {
			if c, f, ok := headerColumn(fields); ok {
				col, scale, unit, columns = c, f, headerName(fields[c]), len(fields)
				continue
			}
			col = 0
			if len(fields) > 1 {
				return nil, fmt.Errorf("line %d: a table needs a header naming the wavelength column and its unit", line)
			}
		}
		if col < 0 {
			col = 0
		}
		switch {
		case columns == 1 && len(fields) == 2:
			return nil, fmt.Errorf("line %d: %q has two values under a header of one column (a decimal comma? write %s)", line, shorten(text), strings.Replace(shorten(text), ",", ".", 1))
		case columns > 0 && len(fields) != columns:
			return nil, fmt.Errorf("line %d: %d columns under a header of %d", line, len(fields), columns)
		case col >= len(fields):
			return nil, fmt.Errorf("line %d: %d columns, want at least %d", line, len(fields), col+1)
		}
		v, err := parseValue(strings.TrimSpace(fields[col]), scale, unit)
		if err != nil {
			return nil, fmt.Errorf("line %d: %w", line, err)
		}
		out = append(out, v)
	}
	if len(out) == 0 {
		return nil, errors.New("no wavelengths")
	}
	if err := CheckWavelengths(out, len(out)); err != nil {
		return nil, err
	}
	return out, nil
}

// headerName is the unit a header names, for messages: "nm" or "um".
func headerName(h string) string {
	if f, _ := headerUnit(h); f == 1 {
		return "nm"
	}
	return "um"
}

// shorten cuts text to 40 bytes for messages: a line may be megabytes.
func shorten(text string) string {
	if len(text) <= 40 {
		return text
	}
	return strings.ToValidUTF8(text[:37], "") + "..."
}

// headerColumn recognises a header row: the column whose name carries a
// unit, preferring one containing "wavelength".
func headerColumn(fields []string) (int, float64, bool) {
	best, scale := -1, 0.0
	for i, f := range fields {
		f = strings.TrimSpace(f)
		if _, err := strconv.ParseFloat(f, 64); err == nil || (f != "" && (f[0] >= '0' && f[0] <= '9' || f[0] == '.')) {
			return 0, 0, false // a value (perhaps with its unit), not a header
		}
		s, ok := headerUnit(f)
		if !ok {
			continue
		}
		if best < 0 || strings.Contains(strings.ToLower(f), "wavelength") {
			best, scale = i, s
		}
	}
	return best, scale, best >= 0
}

// parseValue parses "450", with scale from the header naming headerUnit,
// or "450 nm"; the result in nanometres must lie in [MinNM, MaxNM].
func parseValue(s string, scale float64, headerUnit string) (float64, error) {
	num := strings.TrimRightFunc(s, func(r rune) bool { return !(r >= '0' && r <= '9' || r == '.') })
	unit := strings.TrimSpace(s[len(num):])
	v, err := strconv.ParseFloat(strings.TrimSpace(num), 64)
	if err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
		return 0, fmt.Errorf("%q is not a wavelength", shorten(s))
	}
	switch {
	case unit != "":
		return WavelengthToNM(v, unit)
	case scale == 0:
		return 0, fmt.Errorf("%q has no unit: add a header such as wavelength_nm or write \"%s nm\"", shorten(s), shorten(s))
	}
	return toNM(v, scale, headerUnit)
}

// ParseBandRanges parses a list of 1-based band numbers and ranges,
// "104-113,150-170,7", into sorted distinct band numbers (the --exclude
// flag).
func ParseBandRanges(s string) ([]int, error) {
	seen := map[int]bool{}
	var out []int
	for _, part := range strings.Split(s, ",") {
		part = strings.TrimSpace(part)
		lo, hi, isRange := strings.Cut(part, "-")
		a, err := strconv.Atoi(strings.TrimSpace(lo))
		b := a
		if err == nil && isRange {
			b, err = strconv.Atoi(strings.TrimSpace(hi))
		}
		switch {
		case err != nil:
			return nil, fmt.Errorf("%q is not a band number or range such as 104-113", part)
		case a < 1 || b < a:
			return nil, fmt.Errorf("%q: bands count from 1 and ranges go upwards", part)
		case b-a > 1<<20:
			return nil, fmt.Errorf("%q: range too long", part)
		}
		for i := a; i <= b; i++ {
			if !seen[i] {
				seen[i] = true
				out = append(out, i)
			}
		}
	}
	slices.Sort(out)
	return out, nil
}

// NMRange is a closed wavelength interval in nanometres.
type NMRange struct{ Lo, Hi float64 }

// ParseNMRanges parses wavelength ranges in nanometres, "1340-1450,1790-1970"
// (the --exclude-nm flag).
func ParseNMRanges(s string) ([]NMRange, error) {
	var out []NMRange
	for _, part := range strings.Split(s, ",") {
		part = strings.TrimSpace(part)
		lo, hi, ok := strings.Cut(part, "-")
		a, err1 := strconv.ParseFloat(strings.TrimSpace(lo), 64)
		b, err2 := strconv.ParseFloat(strings.TrimSpace(hi), 64)
		switch {
		case !ok || err1 != nil || err2 != nil:
			return nil, fmt.Errorf("%q is not a wavelength range in nm such as 1340-1450", part)
		case !finite(a) || !finite(b) || a <= 0 || b < a:
			return nil, fmt.Errorf("%q: want positive wavelengths, the lower first", part)
		}
		out = append(out, NMRange{a, b})
	}
	return out, nil
}

// Contains reports whether w lies in r.
func (r NMRange) Contains(w float64) bool { return w >= r.Lo && w <= r.Hi }
