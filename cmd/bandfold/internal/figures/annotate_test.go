package figures

import (
	"image"
	"image/color"
	"testing"
)

func TestScaleBar(t *testing.T) {
	for _, tc := range []struct {
		widthPx int
		mpp     float64
		metres  float64
		barPx   int
		label   string
	}{
		{1000, 10, 2000, 200, "2 km"},
		{1000, 30, 5000, 167, "5 km"},
		{400, 10, 500, 50, "500 m"},
		{500, 10, 1000, 100, "1 km"},
		{800, 0.5, 50, 100, "50 m"},
		{100, 0.1, 2, 20, "2 m"},
		{20, 0.1, 0.2, 2, "0.2 m"},
		{3000, 300, 100000, 333, "100 km"},
	} {
		m, bar, label := scaleBar(tc.widthPx, tc.mpp)
		if !near(m, tc.metres) || bar != tc.barPx || label != tc.label {
			t.Errorf("scaleBar(%d px, %v m/px) = %v m, %d px, %q; want %v m, %d px, %q",
				tc.widthPx, tc.mpp, m, bar, label, tc.metres, tc.barPx, tc.label)
		}
	}
}

func TestAnnotate(t *testing.T) {
	img := image.NewRGBA(image.Rect(0, 0, 300, 120))
	img.SetRGBA(0, 0, color.RGBA{1, 2, 3, 255})
	img.SetRGBA(299, 119, color.RGBA{4, 5, 6, 255})
	full := Annotate(img, Annotation{
		Swatch: color.RGBA{255, 220, 0, 255}, SwatchLabel: "mapped change",
		MetresPerPixel: 10, Text: "changed area 123.4 ha",
	})
	b := full.Bounds()
	if b.Dx() < 300 || b.Dy() != 120+2*panelPad+2*panelRow {
		t.Fatalf("annotated size %v", b)
	}
	if full.RGBAAt(0, 0) != (color.RGBA{1, 2, 3, 255}) || full.RGBAAt(299, 119) != (color.RGBA{4, 5, 6, 255}) {
		t.Error("image pixels moved")
	}
	// The swatch colour appears in the panel.
	found := false
	for y := 120; y < b.Dy() && !found; y++ {
		for x := range b.Dx() {
			if full.RGBAAt(x, y) == (color.RGBA{255, 220, 0, 255}) {
				found = true
				break
			}
		}
	}
	if !found {
		t.Error("swatch not drawn")
	}
	textOnly := Annotate(img, Annotation{Text: "x"})
	if textOnly.Bounds().Dy() != 120+2*panelPad+panelRow {
		t.Errorf("text-only size %v", textOnly.Bounds())
	}
	if plain := Annotate(img, Annotation{}); plain.Bounds() != img.Bounds() {
		t.Errorf("empty annotation size %v", plain.Bounds())
	}
	// A narrow image is widened to fit the panel.
	narrow := Annotate(image.NewRGBA(image.Rect(0, 0, 40, 40)), Annotation{Text: "changed area 123.4 ha"})
	if narrow.Bounds().Dx() <= 40 {
		t.Errorf("narrow image not widened: %v", narrow.Bounds())
	}
}
