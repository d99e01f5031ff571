package figures

import (
	"fmt"
	"image"
	"image/color"
	"image/draw"
	"math"
	"strings"

	"gonum.org/v1/plot/font"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/vgimg"
)

// Annotation describes the panel that Annotate adds below a quicklook.
type Annotation struct {
	// Swatch is the colour of the legend swatch, e.g. the Outline colour.
	Swatch color.RGBA
	// SwatchLabel names the swatch, e.g. "mapped change"; empty draws
	// no swatch.
	SwatchLabel string
	// MetresPerPixel is the ground size of one image pixel; zero or
	// less draws no scale bar.
	MetresPerPixel float64
	// Text is a line under the legend, e.g. "changed area 123.4 ha";
	// empty draws none.
	Text string
	// Title is a line above the legend; empty draws none.
	Title string
	// Lines are further lines under Text (for example the dates and a
	// caution), each wrapped at word boundaries to the panel's width.
	Lines []string
	// NorthArrow draws a north arrow in the image's top right corner: for
	// north-up images with a CRS only.
	NorthArrow bool
}

// Panel geometry in pixels.
const (
	panelPad    = 12
	panelRow    = 28
	swatchSide  = 16
	itemGap     = 10 // between a glyph and its label
	groupGap    = 36 // between the legend and the scale bar
	barHeight   = 6
	barTickSpan = 16
)

// Annotate returns a copy of img with a panel below it holding a
// legend swatch and label, a scale bar of a round length near a fifth
// of the image width, and a line of text, each when requested. The
// result is widened with the panel colour when the panel needs more
// room than the image has; the image keeps its pixels at the top left.
func Annotate(img *image.RGBA, opts Annotation) *image.RGBA {
	b := img.Bounds()
	w, h := b.Dx(), b.Dy()
	face := font.DefaultCache.Lookup(sansFont, vg.Length(annotateSize))
	textW := func(s string) int { return int(math.Ceil(float64(face.Width(s)))) }

	var barPx int
	var barLabel string
	if opts.MetresPerPixel > 0 && w > 0 {
		_, barPx, barLabel = scaleBar(w, opts.MetresPerPixel)
	}
	hasSwatch, hasBar := opts.SwatchLabel != "", barPx > 0

	legendW, barW := 0, 0
	if hasSwatch {
		legendW = swatchSide + itemGap + textW(opts.SwatchLabel)
	}
	if hasBar {
		barW = barPx + itemGap + textW(barLabel)
	}
	rows, need := 0, 0
	if hasSwatch || hasBar {
		rows++
		need = 2*panelPad + legendW + barW
		if hasSwatch && hasBar {
			need += groupGap
		}
	}
	var lines []string
	for _, l := range []string{opts.Title, opts.Text} {
		if l != "" {
			lines = append(lines, l)
			need = max(need, 2*panelPad+textW(l))
		}
	}
	W := max(w, need)
	for _, l := range opts.Lines {
		lines = append(lines, wrap(l, W-2*panelPad, textW)...)
	}
	rows += len(lines)
	panelH := 0
	if rows > 0 {
		panelH = 2*panelPad + rows*panelRow
	}

	out := image.NewRGBA(image.Rect(0, 0, W, h+panelH))
	draw.Draw(out, out.Bounds(), image.NewUniform(panelColour), image.Point{}, draw.Src)
	draw.Draw(out, image.Rect(0, 0, w, h), img, b.Min, draw.Src)
	if rows == 0 {
		return out
	}

	// The panel is drawn at 72 dpi, so one vg point is one pixel; vg's
	// y axis points up from the panel's bottom edge.
	c := vgimg.NewWith(vgimg.UseWH(vg.Length(W), vg.Length(panelH)),
		vgimg.UseDPI(72), vgimg.UseBackgroundColor(panelColour))
	rowMid := func(i int) float64 { return float64(panelH - panelPad - i*panelRow - panelRow/2) }
	baseline := func(mid float64) vg.Length { return vg.Length(mid - 0.36*annotateSize) }
	rect := func(x0, y0, x1, y1 float64) {
		var p vg.Path
		p.Move(vg.Point{X: vg.Length(x0), Y: vg.Length(y0)})
		p.Line(vg.Point{X: vg.Length(x1), Y: vg.Length(y0)})
		p.Line(vg.Point{X: vg.Length(x1), Y: vg.Length(y1)})
		p.Line(vg.Point{X: vg.Length(x0), Y: vg.Length(y1)})
		p.Close()
		c.Fill(p)
	}
	// Thin rule separating the image from the panel.
	c.SetColor(inkColour)
	rect(0, float64(panelH-1), float64(W), float64(panelH))

	row := 0
	if hasSwatch || hasBar {
		mid := rowMid(row)
		if hasSwatch {
			x := float64(panelPad)
			c.SetColor(inkColour)
			rect(x-1, mid-swatchSide/2-1, x+swatchSide+1, mid+swatchSide/2+1)
			c.SetColor(opts.Swatch)
			rect(x, mid-swatchSide/2, x+swatchSide, mid+swatchSide/2)
			c.SetColor(inkColour)
			c.FillString(face, vg.Point{X: vg.Length(x + swatchSide + itemGap), Y: baseline(mid)}, opts.SwatchLabel)
		}
		if hasBar {
			x := float64(W - panelPad - barW)
			c.SetColor(inkColour)
			rect(x, mid-barHeight/2, x+float64(barPx), mid+barHeight/2)
			rect(x, mid-barTickSpan/2, x+2, mid+barTickSpan/2)
			rect(x+float64(barPx)-2, mid-barTickSpan/2, x+float64(barPx), mid+barTickSpan/2)
			c.FillString(face, vg.Point{X: vg.Length(x + float64(barPx+itemGap)), Y: baseline(mid)}, barLabel)
		}
		row++
	}
	c.SetColor(inkColour)
	for _, l := range lines {
		c.FillString(face, vg.Point{X: panelPad, Y: baseline(rowMid(row))}, l)
		row++
	}
	draw.Draw(out, image.Rect(0, h, W, h+panelH), c.Image(), image.Point{}, draw.Src)
	if opts.NorthArrow {
		northArrow(out, w)
	}
	return out
}

// wrap splits s at spaces into lines no wider than width (a single word
// wider than width stays whole).
func wrap(s string, width int, textW func(string) int) []string {
	words := strings.Fields(s)
	var out []string
	line := ""
	for _, w := range words {
		if line != "" && textW(line+" "+w) > width {
			out = append(out, line)
			line = w
			continue
		}
		if line == "" {
			line = w
		} else {
			line += " " + w
		}
	}
	if line != "" {
		out = append(out, line)
	}
	return out
}

// North arrow geometry in pixels.
const (
	arrowSize = 44 // box side
	arrowPad  = 10
)

// northArrow draws an arrow pointing up with an N in a light box at the
// top right corner of the first w columns of img.
func northArrow(img *image.RGBA, w int) {
	if w < arrowSize+2*arrowPad || img.Bounds().Dy() < arrowSize+2*arrowPad {
		return
	}
	c := vgimg.NewWith(vgimg.UseWH(arrowSize, arrowSize), vgimg.UseDPI(72), vgimg.UseBackgroundColor(panelColour))
	c.SetColor(inkColour)
	var p vg.Path
	mid := vg.Length(arrowSize) / 2
	p.Move(vg.Point{X: mid, Y: arrowSize - 4})
	p.Line(vg.Point{X: mid + 9, Y: arrowSize - 22})
	p.Line(vg.Point{X: mid, Y: arrowSize - 17})
	p.Line(vg.Point{X: mid - 9, Y: arrowSize - 22})
	p.Close()
	c.Fill(p)
	face := font.DefaultCache.Lookup(sansFont, vg.Length(annotateSize))
	c.FillString(face, vg.Point{X: mid - face.Width("N")/2, Y: 5}, "N")
	x0 := w - arrowSize - arrowPad
	draw.Draw(img, image.Rect(x0, arrowPad, x0+arrowSize, arrowPad+arrowSize), c.Image(), image.Point{}, draw.Src)
}

// scaleBar picks the scale-bar length for an image widthPx pixels wide
// at mpp metres per pixel: the largest 1, 2 or 5 × 10ⁿ metres not
// longer than a fifth of the image width. It returns that length, its
// size in pixels and its label ("500 m", "2 km").
func scaleBar(widthPx int, mpp float64) (metres float64, barPx int, label string) {
	target := float64(widthPx) * mpp / 5
	mag := math.Pow(10, math.Floor(math.Log10(target)))
	metres = mag
	for _, m := range []float64{5, 2} {
		if m*mag <= target*(1+1e-9) {
			metres = m * mag
			break
		}
	}
	barPx = int(math.Round(metres / mpp))
	if metres >= 1000 {
		label = fmt.Sprintf("%g km", metres/1000)
	} else {
		label = fmt.Sprintf("%g m", metres)
	}
	return metres, barPx, label
}
