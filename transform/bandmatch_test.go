package transform

import (
	"slices"
	"testing"
)

// Nominal band edges of Landsat 7 ETM+ and Landsat 8 OLI (USGS Landsat 7
// and Landsat 8 Data Users Handbooks' band tables; the same values as
// raster's table).
var (
	etm = []SpectralBand{
		{"B1 blue", 450, 515, 482.5}, {"B2 green", 525, 605, 565}, {"B3 red", 630, 690, 660},
		{"B4 nir", 775, 900, 837.5}, {"B5 swir16", 1550, 1750, 1650}, {"B7 swir22", 2080, 2350, 2215},
	}
	oli = []SpectralBand{
		{"B1 coastal", 435, 451, 443}, {"B2 blue", 452, 512, 482}, {"B3 green", 533, 590, 561.5},
		{"B4 red", 636, 673, 654.5}, {"B5 nir08", 851, 879, 865}, {"B6 swir16", 1566, 1651, 1608.5},
		{"B7 swir22", 2107, 2294, 2200.5},
	}
)

// TestCompatible: the pairs the issue of record names (common practice in
// cross-sensor work: ETM+ and OLI bands of the same name correspond).
func TestCompatible(t *testing.T) {
	for _, tc := range []struct {
		a, b SpectralBand
		want bool
	}{
		{etm[3], oli[4], true},  // NIR 775-900 and 851-879
		{etm[0], oli[0], false}, // blue and coastal
		{etm[0], oli[1], true},  // blue and blue
		{etm[1], oli[0], false}, // green and coastal
		{SpectralBand{Label: "unknown"}, oli[0], true},
		{SpectralBand{"c", 0, 0, 865}, oli[4], true},
		{SpectralBand{"c", 0, 0, 865}, SpectralBand{"d", 0, 0, 870}, true},
		{SpectralBand{"c", 0, 0, 865}, SpectralBand{"d", 0, 0, 900}, false},
	} {
		if got := Compatible(tc.a, tc.b); got != tc.want {
			t.Errorf("Compatible(%s, %s) = %v, want %v", tc.a.Label, tc.b.Label, got, tc.want)
		}
	}
}

// TestMatchSharedLandsat7And8: the six reflective ETM+ bands pair with OLI
// bands 2-7, and the coastal band stays out (known from the band tables).
func TestMatchSharedLandsat7And8(t *testing.T) {
	got := MatchShared(etm, oli)
	want := [][2]int{{0, 1}, {1, 2}, {2, 3}, {3, 4}, {4, 5}, {5, 6}}
	if !slices.Equal(flat(got), flat(want)) {
		t.Errorf("pairs %v, want %v", got, want)
	}
	got = MatchShared(oli, etm)
	want = [][2]int{{1, 0}, {2, 1}, {3, 2}, {4, 3}, {5, 4}, {6, 5}}
	if !slices.Equal(flat(got), flat(want)) {
		t.Errorf("reverse pairs %v, want %v", got, want)
	}
}

func flat(pairs [][2]int) []int {
	var out []int
	for _, p := range pairs {
		out = append(out, p[0], p[1])
	}
	return out
}
