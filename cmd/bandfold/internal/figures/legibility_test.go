package figures

import (
	"fmt"
	"image/color"
	"math"
	"math/rand/v2"
	"slices"
	"strings"
	"testing"

	"gonum.org/v1/gonum/stat/distuv"
)

// caution is a line as long as the caution under the job's figures.
const caution = "A change map is a screening result: verify mapped changes against imagery or field checks before acting on them; local regulations and licensed practice govern any action taken on it."

// rateData is a curve like the demo cube's: 120 numbers of kept
// components, the error and the size ratio falling as k grows, the
// smallest k far from the rest.
func rateData(n int, budget float64) RateData {
	d := RateData{Title: "Estimated size against error: vessel-hyper.tif, pca", Budget: budget}
	for k := 1; k <= n; k++ {
		d.K = append(d.K, k)
		d.RMSE = append(d.RMSE, 30+420/math.Pow(float64(k), 1.3))
		d.Ratio = append(d.Ratio, 2200/math.Pow(float64(k), 1.05))
	}
	return d
}

// heavyTail is a chi-square sample (k = 3) with every 40th value eight
// times larger, so that the QQ panel has points on its top edge.
func heavyTail(n int) []float64 {
	chi := distuv.ChiSquared{K: 3, Src: rand.New(rand.NewPCG(1, 1))}
	z := make([]float64, n)
	for i := range z {
		z[i] = chi.Rand()
		if i%40 == 0 {
			z[i] *= 8
		}
	}
	return z
}

// firstChange is a first-change map of four steps as the timeline draws
// it: patches of every date, the legend, and the panel with the scale
// bar, the north arrow, the title and the caution.
func firstChange() Layout {
	w, h := 600, 400
	vals := make([]uint8, w*h)
	for i := range vals {
		vals[i] = uint8((i % w) / 150) // a band of each date, and none
	}
	dates := []string{"2019-06-12", "2020-06-16", "2021-06-14", "2022-06-18", "2023-06-15"}
	var labels []string
	for q := range 4 {
		labels = append(labels, "first lasting change between "+dates[q]+" and "+dates[q+1])
	}
	m := DateMapLayout(w, h, vals, DateColours(4), labels)
	return AnnotateLayout(m, Annotation{Title: "Date of first lasting change, 2019-06-12 to 2023-06-15", MetresPerPixel: 10, NorthArrow: true,
		Lines: []string{caution, "invented scenario: Vessel river catchment (invented demo data, five-date series)"}})
}

// TestFigureText (issue 26): in every figure this package draws for the
// change, timeline and basis reports, no text overlaps other text or
// leaves the image, and all of it is in the package's sans-serif face.
// The boxes are the plot library's (gonum/plot's font metrics, see
// Layout); that they must not overlap is known by construction.
func TestFigureText(t *testing.T) {
	timeline := func(steps int) func() (Layout, error) {
		return func() (Layout, error) {
			d := TimelineData{Unit: "ha", Title: "Mapped change per step: lasting, and flagged but did not last"}
			for q := range steps {
				d.Steps = append(d.Steps, fmt.Sprintf("20%02d-06-15", 20+q))
				d.Lasting, d.Passing = append(d.Lasting, float64(q*40)), append(d.Passing, float64(150-q*30))
			}
			l, err := TimelineLayout(d)
			return AnnotateLayout(l, Annotation{Lines: []string{caution}}), err
		}
	}
	tests := []struct {
		name string
		draw func() (Layout, error)
	}{
		{"rate, 120 components", func() (Layout, error) { return RateLayout(rateData(120, 0)) }},
		{"rate, 7 components and a budget", func() (Layout, error) { return RateLayout(rateData(7, 60)) }},
		{"diagnostics", func() (Layout, error) {
			return DiagnosticsLayout(DiagnosticsData{Z: heavyTail(20000), K: 3, Threshold: 16.27, Title: "Z of 20,000 sampled pixels against chi-square, k = 3"})
		}},
		{"timeline, 4 steps", timeline(4)},
		{"timeline, 12 steps", timeline(12)},
		{"first change", func() (Layout, error) { return firstChange(), nil }},
	}
	for _, tc := range tests {
		l, err := tc.draw()
		if err != nil {
			t.Fatalf("%s: %v", tc.name, err)
		}
		if len(l.Text) == 0 {
			t.Errorf("%s: no text recorded", tc.name)
		}
		for _, o := range l.Overlaps() {
			t.Errorf("%s: %s", tc.name, o)
		}
		for _, b := range l.Text {
			if b.Font != "Liberation Sans" {
				t.Errorf("%s: %q drawn in %q, want Liberation Sans", tc.name, b.Text, b.Font)
			}
		}
	}
}

// TestRateLabelsAFew: of 120 numbers of components only a few are
// labelled, the round ones first (k = 1 and 10 among them), and none
// twice (known by construction of labelOrder and labelPoints).
func TestRateLabelsAFew(t *testing.T) {
	l, err := RateLayout(rateData(120, 0))
	if err != nil {
		t.Fatal(err)
	}
	var ks []string
	for _, b := range l.Text {
		if strings.HasPrefix(b.Text, "k=") {
			ks = append(ks, b.Text)
		}
	}
	if len(ks) < 5 || len(ks) > 30 {
		t.Errorf("%d points labelled (%v), want a few (5 to 30)", len(ks), ks)
	}
	for _, want := range []string{"k=1", "k=10"} {
		if !slices.Contains(ks, want) {
			t.Errorf("%s not labelled: %v", want, ks)
		}
	}
	if len(slices.Compact(slices.Sorted(slices.Values(ks)))) != len(ks) {
		t.Errorf("a label written twice: %v", ks)
	}
}

// TestNorthArrow: a map annotated with a north arrow shows its N, and one
// without does not (known by construction).
func TestNorthArrow(t *testing.T) {
	for _, arrow := range []bool{true, false} {
		l := AnnotateLayout(DateMapLayout(200, 200, make([]uint8, 200*200), DateColours(2), []string{"a", "b"}), Annotation{NorthArrow: arrow})
		hasN := slices.ContainsFunc(l.Text, func(b TextBox) bool { return b.Text == "N" })
		if hasN != arrow {
			t.Errorf("north arrow %v: an N drawn: %v", arrow, hasN)
		}
	}
}

// luminance is the relative luminance of c (WCAG 2.1, "relative
// luminance": sRGB channels linearised, weighted 0.2126, 0.7152, 0.0722).
func luminance(c color.RGBA) float64 {
	lin := func(v uint8) float64 {
		s := float64(v) / 255
		if s <= 0.04045 {
			return s / 12.92
		}
		return math.Pow((s+0.055)/1.055, 2.4)
	}
	return 0.2126*lin(c.R) + 0.7152*lin(c.G) + 0.0722*lin(c.B)
}

// contrast is the WCAG 2.1 contrast ratio (L1 + 0.05) / (L2 + 0.05) of the
// lighter and the darker colour.
func contrast(a, b color.RGBA) float64 {
	la, lb := luminance(a), luminance(b)
	return (max(la, lb) + 0.05) / (min(la, lb) + 0.05)
}

// TestMapColours (issue 26): every class colour of the change maps has a
// contrast of at least 3:1 (WCAG 2.1's threshold for graphics) with the
// map's background and the legend panel, the flags with white too (the
// timeline's bars), and the dates' lightness falls from the first date to
// the last, so that their order reads without colour vision. The ratios
// are computed with WCAG's formula; white, for example, has 1.05 / 0.05 =
// 21 against black (WCAG's own example).
func TestMapColours(t *testing.T) {
	white, black := color.RGBA{255, 255, 255, 255}, color.RGBA{0, 0, 0, 255}
	if r := contrast(white, black); math.Abs(r-21) > 1e-12 {
		t.Fatalf("contrast of white and black %v, want 21", r)
	}
	check := func(name string, c color.RGBA, bgs ...color.RGBA) {
		for _, bg := range bgs {
			if r := contrast(c, bg); r < 3 {
				t.Errorf("%s %v: contrast %.2f:1 with %v, want at least 3:1", name, c, r, bg)
			}
		}
	}
	check("lasting", LastingColour, MapBackground, panelColour, white)
	check("flagged", FlaggedColour, MapBackground, panelColour, white)
	for n := 1; n <= 12; n++ {
		cs := DateColours(n)
		for i, c := range cs {
			check(fmt.Sprintf("date %d of %d", i+1, n), c, MapBackground, panelColour)
			if i > 0 && luminance(c) >= luminance(cs[i-1]) {
				t.Errorf("date %d of %d: lightness %.4f, not below the date before (%.4f)", i+1, n, luminance(c), luminance(cs[i-1]))
			}
		}
	}
}
