package figures

import (
	"bytes"
	"fmt"
	"image/color"
	"image/png"
	"math"
	"slices"
	"testing"
)

func TestLoadingGrid(t *testing.T) {
	l := LoadingsData{
		BandNames: []string{"blue", "green", "red"},
		Vectors: [][]float64{
			{0.5, 0.6, -0.7},
			{-0.9, 0.1, 0.2},
			{0.3, 0.3, 0.3}, // not kept
		},
		Components: 2,
	}
	g, err := loadingGrid(l)
	if err != nil {
		t.Fatal(err)
	}
	c, r := g.Dims()
	if c != 3 || r != 2 {
		t.Fatalf("dims %d×%d, want 3 bands × 2 components", c, r)
	}
	if g.limit != 0.9 {
		t.Errorf("limit %v, want max|loading| 0.9", g.limit)
	}
	// PC1 is the top row (r = 1), PC2 the bottom row (r = 0).
	for band := range 3 {
		if got, want := g.Z(band, 1), l.Vectors[0][band]; got != want {
			t.Errorf("PC1 band %d: %v, want %v", band, got, want)
		}
		if got, want := g.Z(band, 0), l.Vectors[1][band]; got != want {
			t.Errorf("PC2 band %d: %v, want %v", band, got, want)
		}
	}
	if g.component(1) != 1 || g.component(0) != 2 {
		t.Errorf("row labels PC%d (top), PC%d (bottom)", g.component(1), g.component(0))
	}
}

func TestLoadingGridDefaultsAndErrors(t *testing.T) {
	g, err := loadingGrid(LoadingsData{Vectors: [][]float64{{1, 2}}})
	if err != nil {
		t.Fatal(err)
	}
	if g.names[0] != "B1" || g.names[1] != "B2" {
		t.Errorf("default names %v", g.names)
	}
	for name, l := range map[string]LoadingsData{
		"none":       {},
		"too many k": {Vectors: [][]float64{{1}}, Components: 2},
		"ragged":     {Vectors: [][]float64{{1, 2}, {1}}},
		"names":      {Vectors: [][]float64{{1, 2}}, BandNames: []string{"a"}},
		"nan":        {Vectors: [][]float64{{1, math.NaN()}}},
		"no bands":   {Vectors: [][]float64{{}}},
	} {
		if _, err := loadingGrid(l); err == nil {
			t.Errorf("%s: no error", name)
		}
	}
}

func TestDivergingSymmetric(t *testing.T) {
	d := newDiverging(0.8)
	if d.Min() != -0.8 || d.Max() != 0.8 {
		t.Fatalf("range [%v, %v], want ±0.8", d.Min(), d.Max())
	}
	zero, err := d.At(0)
	if err != nil {
		t.Fatal(err)
	}
	if zero != color.Color(neutralColour) {
		t.Errorf("At(0) = %v, want neutral %v", zero, neutralColour)
	}
	lo, _ := d.At(-0.8)
	hi, _ := d.At(0.8)
	if lo != color.Color(divergingStops[0]) || hi != color.Color(divergingStops[4]) {
		t.Errorf("ends %v %v", lo, hi)
	}
	// Negative loadings are blue-leaning, positive red-leaning, and the
	// colour moves away from neutral as |v| grows, on both sides.
	prevNeg, prevPos := 0.0, 0.0
	for _, v := range []float64{0.1, 0.3, 0.5, 0.8} {
		neg, _ := d.At(-v)
		pos, _ := d.At(v)
		nr, _, nb, _ := neg.RGBA()
		pr, _, pb, _ := pos.RGBA()
		if nb <= nr || pr <= pb {
			t.Errorf("±%v: negative %v, positive %v", v, neg, pos)
		}
		dn, dp := dist(neg, neutralColour), dist(pos, neutralColour)
		if dn <= prevNeg || dp <= prevPos {
			t.Errorf("±%v: not moving away from neutral (%v, %v)", v, dn, dp)
		}
		prevNeg, prevPos = dn, dp
	}
	if _, err := d.At(0.81); err == nil {
		t.Error("At outside range: no error")
	}
	// An odd palette puts the neutral colour in the middle, where the
	// heat map's index rounding sends zero.
	cs := d.Palette(255).Colors()
	mid := int((0-d.Min())*float64(len(cs)-1)/(d.Max()-d.Min()) + 0.5)
	if mid != len(cs)/2 || cs[mid] != color.Color(neutralColour) {
		t.Errorf("zero maps to palette index %d (%v), want %d neutral", mid, cs[mid], len(cs)/2)
	}
	if newDiverging(0).limit != 1 {
		t.Error("zero limit not replaced")
	}
}

func dist(a color.Color, b color.RGBA) float64 {
	r, g, bb, _ := a.RGBA()
	dr, dg, db := float64(r>>8)-float64(b.R), float64(g>>8)-float64(b.G), float64(bb>>8)-float64(b.B)
	return math.Sqrt(dr*dr + dg*dg + db*db)
}

func TestThinIndices(t *testing.T) {
	for _, tc := range []struct{ n, max, count, step int }{
		{3, 40, 3, 1},
		{40, 40, 40, 1},
		{41, 40, 21, 2},
		{224, 40, 38, 6},
	} {
		idx := thinIndices(tc.n, tc.max)
		if len(idx) != tc.count || len(idx) > tc.max || (len(idx) > 1 && idx[1] != tc.step) {
			t.Errorf("thinIndices(%d, %d) = %d labels, step %d; want %d, step %d",
				tc.n, tc.max, len(idx), idx[1]-idx[0], tc.count, tc.step)
		}
	}
}

func TestLoadingsPNG(t *testing.T) {
	const bands, k = 224, 5
	names := make([]string, bands)
	vecs := make([][]float64, k)
	for j := range names {
		names[j] = fmt.Sprintf("%.0f nm", 400+10*float64(j))
	}
	for i := range vecs {
		vecs[i] = make([]float64, bands)
		for j := range vecs[i] {
			vecs[i][j] = math.Sin(float64((i+1)*j) / 30)
		}
	}
	var buf bytes.Buffer
	if err := Loadings(&buf, LoadingsData{BandNames: names, Vectors: vecs}); err != nil {
		t.Fatal(err)
	}
	img, err := png.Decode(&buf)
	if err != nil {
		t.Fatal(err)
	}
	if b := img.Bounds(); b.Dx() != loadingsWidth || b.Dx() < 800 || b.Dy() != loadingsHeight(k) {
		t.Errorf("size %v", b)
	}
}

func TestSpectralSegments(t *testing.T) {
	// Known by construction: a gap wider than 1.5 median steps breaks the line.
	for _, tc := range []struct {
		name string
		nm   []float64
		want [][2]int
	}{
		{"even", []float64{400, 410, 420, 430}, [][2]int{{0, 4}}},
		{"one window", []float64{400, 410, 420, 500, 510, 520}, [][2]int{{0, 3}, {3, 6}}},
		{"two windows", []float64{400, 410, 480, 490, 500, 600, 610}, [][2]int{{0, 2}, {2, 5}, {5, 7}}},
		{"one band", []float64{550}, [][2]int{{0, 1}}},
	} {
		if got := spectralSegments(tc.nm); !slices.Equal(got, tc.want) {
			t.Errorf("%s: %v, want %v", tc.name, got, tc.want)
		}
	}
}

func TestLoadingsSpectralPanel(t *testing.T) {
	vecs := [][]float64{{0.5, 0.5, 0.5, 0.5}, {0.5, -0.5, 0.5, -0.5}}
	var with, without bytes.Buffer
	if err := Loadings(&with, LoadingsData{Vectors: vecs, WavelengthsNM: []float64{450, 550, 650, 2200}}); err != nil {
		t.Fatal(err)
	}
	if err := Loadings(&without, LoadingsData{Vectors: vecs}); err != nil {
		t.Fatal(err)
	}
	a, err1 := png.Decode(&with)
	b, err2 := png.Decode(&without)
	if err1 != nil || err2 != nil {
		t.Fatal(err1, err2)
	}
	if d := a.Bounds().Dy() - b.Bounds().Dy(); d != spectralHeight {
		t.Errorf("spectral panel adds %d px, want %d", d, spectralHeight)
	}
	if err := Loadings(&with, LoadingsData{Vectors: vecs, WavelengthsNM: []float64{450, 550}}); err == nil {
		t.Error("2 wavelengths for 4 bands accepted")
	}
}
