package jobkit

import (
	"encoding/json"
	"math"
	"strconv"
	"strings"

	"bandfold/raster"
)

// MinArea is a minimum mapping unit: a ground area in m² or a pixel count.
type MinArea struct{ M2, Px float64 }

// ParseMinArea reads "0.5ha", "5000m2", "1km2", "4px" or "0".
func ParseMinArea(s string) (MinArea, error) {
	s = strings.ToLower(strings.TrimSpace(s))
	units := []struct {
		suffix string
		m2     float64
	}{{"km2", 1e6}, {"m2", 1}, {"ha", 1e4}, {"px", 0}}
	for _, u := range units {
		if num, ok := strings.CutSuffix(s, u.suffix); ok {
			v, err := strconv.ParseFloat(strings.TrimSpace(num), 64)
			if err != nil || v < 0 || math.IsInf(v, 0) || math.IsNaN(v) {
				break
			}
			if u.m2 == 0 {
				return MinArea{Px: v}, nil
			}
			return MinArea{M2: v * u.m2}, nil
		}
	}
	if v, err := strconv.ParseFloat(s, 64); err == nil && v == 0 {
		return MinArea{}, nil
	}
	return MinArea{}, Usagef("--min-area %q: want a number with m2, ha, km2 or px (for example 0.5ha), or 0", s)
}

// String gives m in a form ParseMinArea reads ("5000m2", "4px").
func (m MinArea) String() string {
	if m.M2 > 0 {
		return strconv.FormatFloat(m.M2, 'g', -1, 64) + "m2"
	}
	return strconv.FormatFloat(m.Px, 'g', -1, 64) + "px"
}

// MarshalJSON writes m as its String, the form --min-area takes (a run's
// recorded options name it as the user could give it).
func (m MinArea) MarshalJSON() ([]byte, error) { return json.Marshal(m.String()) }

// Pixels converts the minimum area to a pixel count for the sieve.
func (m MinArea) Pixels(areas *raster.CellAreas) (int, error) {
	if m.M2 == 0 {
		return int(math.Ceil(m.Px)), nil
	}
	if areas == nil {
		return 0, Usagef("--min-area in m2, ha or km2 needs a CRS; give it in px")
	}
	return int(math.Ceil(m.M2 / areas.Mean())), nil
}
