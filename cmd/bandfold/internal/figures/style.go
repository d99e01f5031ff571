package figures

import (
	"bytes"
	"image"
	"image/color"
	"image/png"
	"io"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/font"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgimg"
)

// Figure geometry. Plot canvases are rendered at plotDPI, so one
// point is plotDPI/72 pixels and a 12 pt font is 16 px tall.
const (
	plotDPI      = 96
	titleSize    = 16 // points
	axisSize     = 14
	tickSize     = 12
	legendSize   = 12
	annotateSize = 16 // pixels (Annotate renders at 72 dpi)
	// legendGap is the space (points) between a plot's axis label and
	// the legend drawn below it.
	legendGap = 6
)

// sansFont is the typeface of every figure.
var sansFont = font.Font{Typeface: "Liberation", Variant: "Sans"}

// Palette of the plots: our own choices, kept together so the figures
// look like one family.
var (
	inkColour     = color.RGBA{0x26, 0x2b, 0x33, 0xff} // text, axes, markers
	barColour     = color.RGBA{0x6f, 0x9b, 0xb8, 0xff} // per-component share
	cumColour     = color.RGBA{0x8e, 0x2c, 0x5f, 0xff} // cumulative curve
	stickColour   = color.RGBA{0xd8, 0x8a, 0x1c, 0xff} // broken-stick reference
	panelColour   = color.RGBA{0xf7, 0xf6, 0xf2, 0xff} // Annotate panel
	invalidColour = color.RGBA{0x2e, 0x2e, 0x2e, 0xff} // no-data pixels in RGB
)

// Colours of change maps and the charts that count them, shared with the
// class rasters (steps.tif, change.tif) so that a map reads the same in a
// GIS: the background where nothing changed, and a flag that lasted
// (vermillion) or did not (blue), from Okabe and Ito's colour-blind-safe
// set (Color Universal Design, 2008). Each has a contrast of at least 3:1
// (WCAG 2.1's relative luminance) with MapBackground and with white.
var (
	MapBackground = color.RGBA{236, 236, 228, 255}
	LastingColour = color.RGBA{213, 94, 0, 255}
	FlaggedColour = color.RGBA{0, 114, 178, 255}
)

// px converts a length in pixels of a plotDPI canvas to vg units.
func px(n float64) vg.Length { return vg.Length(n) * vg.Inch / plotDPI }

// newPlot returns a plot with the package's fonts and sizes.
func newPlot(title string) *plot.Plot {
	p := plot.New()
	p.Title.Text = title
	p.Title.TextStyle.Font = font.From(sansFont, titleSize)
	p.Title.TextStyle.Color = inkColour
	p.Title.Padding = vg.Points(8)
	for _, a := range []*plot.Axis{&p.X, &p.Y} {
		a.Label.TextStyle.Font = font.From(sansFont, axisSize)
		a.Label.TextStyle.Color = inkColour
		a.Label.Padding = vg.Points(4)
		a.Tick.Label.Font = font.From(sansFont, tickSize)
		a.Tick.Label.Color = inkColour
		a.Color = inkColour
		a.Tick.Color = inkColour
	}
	p.Legend = newLegend()
	return p
}

// newLegend returns an empty legend in the package's font, its entries
// one a row and spaced so that their lines of text do not touch.
func newLegend() plot.Legend {
	l := plot.NewLegend()
	l.TextStyle.Font = font.From(sansFont, legendSize)
	l.TextStyle.Color = inkColour
	l.ThumbnailWidth = vg.Points(24)
	l.Padding = vg.Points(0.4 * legendSize)
	return l
}

// figurePad is the margin (points) kept free of drawing round a figure, so
// that no text touches its edges.
const figurePad = 8

// padded returns c less the figure's margin.
func padded(c draw.Canvas) draw.Canvas {
	m := vg.Points(figurePad)
	return draw.Crop(c, m, -m, m, -m)
}

// drawBelow draws p in c with leg in a strip under it, its entries
// aligned with the left edge of p's data area: a legend there hides no
// data, whatever the data. It returns the canvas p was drawn in.
func drawBelow(p *plot.Plot, leg plot.Legend, c draw.Canvas) draw.Canvas {
	leg.Top, leg.Left = true, true
	h := leg.Rectangle(c).Size().Y + vg.Points(legendGap)
	area := draw.Crop(c, 0, 0, h, 0)
	p.Draw(area)
	strip := c
	strip.Max.Y = c.Min.Y + h - vg.Points(legendGap)
	strip.Min.X = p.DataCanvas(area).Min.X
	leg.Draw(strip)
	return area
}

// newCanvas returns a white canvas of w×h pixels at plotDPI.
func newCanvas(w, h int) *vgimg.Canvas {
	return vgimg.NewWith(vgimg.UseWH(px(float64(w)), px(float64(h))), vgimg.UseDPI(plotDPI))
}

// encodePNG returns img as PNG.
func encodePNG(img image.Image) ([]byte, error) {
	var buf bytes.Buffer
	if err := png.Encode(&buf, img); err != nil {
		return nil, err
	}
	return buf.Bytes(), nil
}

// writeCanvas encodes c as PNG to w.
func writeCanvas(w io.Writer, c *vgimg.Canvas) error {
	_, err := vgimg.PngCanvas{Canvas: c}.WriteTo(w)
	return err
}
