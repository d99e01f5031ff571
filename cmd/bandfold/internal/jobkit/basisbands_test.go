package jobkit

import (
	"testing"

	"bandfold/raster"
	"bandfold/transform"
)

// TestCutBandMatch: how a band of a cube cut to a basis's bands is checked
// against the basis band (issue 24, item 3): by real names where both have
// one, else by centre wavelength within the 1% of transform.Compatible,
// else not at all. Names made up from the file ("cut:1") say nothing. The
// cases are known by construction.
func TestCutBandMatch(t *testing.T) {
	named := func(name string) raster.Band { return raster.Band{Name: name, Path: "cut.tif", Index: 1} }
	auto := raster.Band{Name: "cut:1", Path: "cut.tif", Index: 1}
	withNM := func(b raster.Band, nm float64) raster.Band { b.WavelengthNM = nm; return b }
	basisBand := func(name string) transform.Band { return transform.Band{Name: name, Source: "cube.tif", Index: 3} }
	autoBasis := basisBand("cube:3")
	tests := []struct {
		name   string
		have   raster.Band
		want   transform.Band
		wantNM float64
		result int
	}{
		{"same names", named("red"), basisBand("red"), 0, bandMatches},
		{"other names", named("red"), basisBand("nir"), 0, bandDiffers},
		{"names win over wavelengths", withNM(named("red"), 650), basisBand("nir"), 650, bandDiffers},
		{"made-up name, wavelengths 0.5% apart", withNM(auto, 653), autoBasis, 650, bandMatches},
		{"made-up name, wavelengths 3% apart", withNM(auto, 670), autoBasis, 650, bandDiffers},
		{"real name against a made-up one, wavelengths agree", withNM(named("red"), 650), autoBasis, 650, bandMatches},
		{"nothing to compare", auto, autoBasis, 0, bandUnknown},
		{"wavelength on one side only", withNM(auto, 650), autoBasis, 0, bandUnknown},
	}
	for _, tc := range tests {
		if got := cutBandMatch(tc.have, tc.want, tc.wantNM); got != tc.result {
			t.Errorf("%s: %d, want %d", tc.name, got, tc.result)
		}
	}
}
