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
	return AnnotateLayout(Layout{Image: img}, opts).Image
}

// AnnotateLayout is Annotate on a figure with the boxes of its text: the
// result keeps them and adds the panel's and the north arrow's.
func AnnotateLayout(fig Layout, opts Annotation) Layout {
	b := fig.Image.Bounds()
	w, h := b.Dx(), b.Dy()
	p := planPanel(w, opts)
	out := image.NewRGBA(image.Rect(0, 0, p.width, h+p.height))
	draw.Draw(out, out.Bounds(), image.NewUniform(panelColour), image.Point{}, draw.Src)
	draw.Draw(out, image.Rect(0, 0, w, h), fig.Image, b.Min, draw.Src)
	text := shifted(fig.Text, image.Pt(-b.Min.X, -b.Min.Y))
	if p.height > 0 {
		panel := p.draw(opts)
		draw.Draw(out, image.Rect(0, h, p.width, h+p.height), panel.Image, image.Point{}, draw.Src)
		text = append(text, shifted(panel.Text, image.Pt(0, h))...)
	}
	if opts.NorthArrow {
		text = append(text, northArrow(out, w)...)
	}
	return Layout{Image: out, Text: text}
}

// panelPlan is the layout of Annotate's panel: its size, the scale bar,
// the lines of text.
type panelPlan struct {
	width, height int
	barPx         int
	barLabel      string
	legendW, barW int
	lines         []string
	legendRow     bool
}

// planPanel lays out the panel of opts under an image w pixels wide.
func planPanel(w int, opts Annotation) panelPlan {
	face := font.DefaultCache.Lookup(sansFont, vg.Length(annotateSize))
	textW := func(s string) int { return int(math.Ceil(float64(face.Width(s)))) }
	var p panelPlan
	if opts.MetresPerPixel > 0 && w > 0 {
		_, p.barPx, p.barLabel = scaleBar(w, opts.MetresPerPixel)
	}
	hasSwatch, hasBar := opts.SwatchLabel != "", p.barPx > 0
	if hasSwatch {
		p.legendW = swatchSide + itemGap + textW(opts.SwatchLabel)
	}
	if hasBar {
		p.barW = p.barPx + itemGap + textW(p.barLabel)
	}
	rows, need := 0, 0
	if p.legendRow = hasSwatch || hasBar; p.legendRow {
		rows++
		need = 2*panelPad + p.legendW + p.barW
		if hasSwatch && hasBar {
			need += groupGap
		}
	}
	for _, l := range []string{opts.Title, opts.Text} {
		if l != "" {
			p.lines = append(p.lines, l)
			need = max(need, 2*panelPad+textW(l))
		}
	}
	p.width = max(w, need)
	for _, l := range opts.Lines {
		p.lines = append(p.lines, wrap(l, p.width-2*panelPad, textW)...)
	}
	if rows += len(p.lines); rows > 0 {
		p.height = 2*panelPad + rows*panelRow
	}
	return p
}

// draw draws the panel of p, at 72 dpi so that one vg point is one pixel;
// vg's y axis points up from the panel's bottom edge.
func (p panelPlan) draw(opts Annotation) Layout {
	face := font.DefaultCache.Lookup(sansFont, vg.Length(annotateSize))
	c := newRecorder(vgimg.NewWith(vgimg.UseWH(vg.Length(p.width), vg.Length(p.height)),
		vgimg.UseDPI(72), vgimg.UseBackgroundColor(panelColour)))
	rowMid := func(i int) float64 { return float64(p.height - panelPad - i*panelRow - panelRow/2) }
	baseline := func(mid float64) vg.Length { return vg.Length(mid - 0.36*annotateSize) }
	// Thin rule separating the image from the panel.
	c.SetColor(inkColour)
	fillRect(c, 0, float64(p.height-1), float64(p.width), float64(p.height))
	row := 0
	if p.legendRow {
		mid := rowMid(row)
		if opts.SwatchLabel != "" {
			swatch(c, panelPad, mid, opts.Swatch)
			c.SetColor(inkColour)
			c.FillString(face, vg.Point{X: vg.Length(panelPad + swatchSide + itemGap), Y: baseline(mid)}, opts.SwatchLabel)
		}
		if p.barPx > 0 {
			x := float64(p.width - panelPad - p.barW)
			c.SetColor(inkColour)
			fillRect(c, x, mid-barHeight/2, x+float64(p.barPx), mid+barHeight/2)
			fillRect(c, x, mid-barTickSpan/2, x+2, mid+barTickSpan/2)
			fillRect(c, x+float64(p.barPx)-2, mid-barTickSpan/2, x+float64(p.barPx), mid+barTickSpan/2)
			c.FillString(face, vg.Point{X: vg.Length(x + float64(p.barPx+itemGap)), Y: baseline(mid)}, p.barLabel)
		}
		row++
	}
	c.SetColor(inkColour)
	for _, l := range p.lines {
		c.FillString(face, vg.Point{X: panelPad, Y: baseline(rowMid(row))}, l)
		row++
	}
	return c.layout()
}

// fillRect fills the rectangle (x0, y0)-(x1, y1) of c in its colour.
func fillRect(c vg.Canvas, x0, y0, x1, y1 float64) {
	var p vg.Path
	p.Move(vg.Point{X: vg.Length(x0), Y: vg.Length(y0)})
	p.Line(vg.Point{X: vg.Length(x1), Y: vg.Length(y0)})
	p.Line(vg.Point{X: vg.Length(x1), Y: vg.Length(y1)})
	p.Line(vg.Point{X: vg.Length(x0), Y: vg.Length(y1)})
	p.Close()
	c.Fill(p)
}

// swatch draws a legend swatch of colour col with a thin ink border, its
// left edge at x and its middle at height mid.
func swatch(c vg.Canvas, x, mid float64, col color.RGBA) {
	c.SetColor(inkColour)
	fillRect(c, x-1, mid-swatchSide/2-1, x+swatchSide+1, mid+swatchSide/2+1)
	c.SetColor(col)
	fillRect(c, x, mid-swatchSide/2, x+swatchSide, mid+swatchSide/2)
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
// top right corner of the first w columns of img, and returns the box of
// its N.
func northArrow(img *image.RGBA, w int) []TextBox {
	if w < arrowSize+2*arrowPad || img.Bounds().Dy() < arrowSize+2*arrowPad {
		return nil
	}
	c := newRecorder(vgimg.NewWith(vgimg.UseWH(arrowSize, arrowSize), vgimg.UseDPI(72), vgimg.UseBackgroundColor(panelColour)))
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
	arrow := c.layout()
	draw.Draw(img, image.Rect(x0, arrowPad, x0+arrowSize, arrowPad+arrowSize), arrow.Image, image.Point{}, draw.Src)
	return shifted(arrow.Text, image.Pt(x0, arrowPad))
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
