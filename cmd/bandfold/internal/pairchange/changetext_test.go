package pairchange_test

import (
	"testing"

	"bandfold/cmd/bandfold/internal/changefolder"
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/report"
	"bandfold/raster"
)

// TestPercentAndCount: percentages with two significant decimals and
// counts with thousands separators, worked by hand.
func TestPercentAndCount(t *testing.T) {
	for _, tc := range []struct {
		f    float64
		want string
	}{
		{22.0 / 4013117, "0.00055%"}, // 0.000548...%
		{0.0131, "1.3%"},
		{0.52, "52%"},
		{1, "100%"},
		{0, "0%"},
	} {
		if got := changefolder.Percent(tc.f); got != tc.want {
			t.Errorf("Percent(%v) = %q, want %q", tc.f, got, tc.want)
		}
	}
	for _, tc := range []struct {
		n    int64
		want string
	}{{4013117, "4,013,117"}, {999, "999"}, {1000, "1,000"}, {0, "0"}, {-1234, "-1,234"}} {
		if got := jobkit.Count(tc.n); got != tc.want {
			t.Errorf("Count(%d) = %q, want %q", tc.n, got, tc.want)
		}
	}
}

// TestNaturalColour: red, green and blue found from band descriptions or
// from wavelengths in the visible ranges, by construction; none otherwise.
func TestNaturalColour(t *testing.T) {
	named := func(names ...string) *raster.Stack {
		s := &raster.Stack{}
		for _, n := range names {
			s.Bands = append(s.Bands, raster.Band{Name: n})
		}
		return s
	}
	waves := func(nm ...float64) *raster.Stack {
		s := &raster.Stack{}
		for _, w := range nm {
			s.Bands = append(s.Bands, raster.Band{Name: "b", WavelengthNM: w})
		}
		return s
	}
	for _, tc := range []struct {
		name string
		s    *raster.Stack
		want [3]int
		ok   bool
	}{
		{"descriptions", named("coastal", "blue", "green", "red", "nir"), [3]int{3, 2, 1}, true},
		{"descriptions in words", named("B2 (blue)", "B3 (green)", "B4 (red)"), [3]int{2, 1, 0}, true},
		{"Landsat 8 OLI centres", waves(443, 482, 561, 655, 865), [3]int{3, 2, 1}, true},
		{"no visible bands", waves(865, 1609, 2201), [3]int{}, false},
		{"unnamed", named("a:1", "a:2", "a:3"), [3]int{}, false},
	} {
		got, ok := report.NaturalColour(tc.s)
		if ok != tc.ok || (ok && got != tc.want) {
			t.Errorf("%s: %v %v, want %v %v", tc.name, got, ok, tc.want, tc.ok)
		}
	}
}
