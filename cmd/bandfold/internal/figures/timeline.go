package figures

import (
	"errors"
	"image"
	"image/color"
	"image/draw"
	"math"
	"slices"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/font"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	vgdraw "gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgimg"
)

// Timeline figure size in pixels.
const (
	timelineWidth  = 1000
	timelineHeight = 520
)

// TimelineData is the input of TimelineBars.
type TimelineData struct {
	// Steps name the steps on the axis ("2020-06-16").
	Steps []string
	// Lasting and Passing are each step's mapped amounts: the flags
	// that lasted, and those that did not.
	Lasting, Passing []float64
	// Unit labels the y axis ("ha" or "pixels").
	Unit  string
	Title string
}

// TimelineBars draws the lasting mapped change per step as bars
// (LastingColour) with the flags that did not last stacked on top
// (FlaggedColour), the legend under the plot, and returns the PNG.
func TimelineBars(d TimelineData) ([]byte, error) {
	l, err := TimelineLayout(d)
	if err != nil {
		return nil, err
	}
	return encodePNG(l.Image)
}

// TimelineLayout is TimelineBars' figure with the boxes of its text.
func TimelineLayout(d TimelineData) (Layout, error) {
	if len(d.Steps) == 0 || len(d.Lasting) != len(d.Steps) || len(d.Passing) != len(d.Steps) {
		return Layout{}, errors.New("figures: timeline: need one lasting and one passing value per step")
	}
	p, leg := newPlot(d.Title), newLegend()
	p.Y.Label.Text = "mapped change (" + d.Unit + ")"
	p.X.Label.Text = "step (date of the later scene)"
	w := px(float64(timelineWidth) / float64(2*len(d.Steps)+1))
	lasting, err := plotter.NewBarChart(plotter.Values(d.Lasting), w)
	if err != nil {
		return Layout{}, err
	}
	lasting.Color, lasting.LineStyle.Width = LastingColour, 0
	flagged, err := plotter.NewBarChart(plotter.Values(d.Passing), w)
	if err != nil {
		return Layout{}, err
	}
	flagged.Color, flagged.LineStyle.Width = FlaggedColour, 0
	flagged.StackOn(lasting)
	p.Add(plotter.NewGrid(), lasting, flagged)
	leg.Add("lasting", lasting)
	leg.Add("flagged, did not last", flagged)
	stepTicks(p, d.Steps)
	p.Y.Min = 0
	c := newRecorder(newCanvas(timelineWidth, timelineHeight))
	drawBelow(p, leg, padded(vgdraw.New(c)))
	return c.layout(), nil
}

// stepTicks names the steps on p's x axis: across when they fit the
// figure's width, else upright, else every n-th one upright.
func stepTicks(p *plot.Plot, steps []string) {
	slot := px(float64(timelineWidth-2*figurePad)) * 0.85 / vg.Length(len(steps))
	sty := p.X.Tick.Label
	widest := vg.Length(0)
	for _, s := range steps {
		widest = max(widest, sty.Width(s))
	}
	labels := slices.Clone(steps)
	if widest > 0.9*slot {
		p.X.Tick.Label.Rotation = math.Pi / 2
		p.X.Tick.Label.XAlign, p.X.Tick.Label.YAlign = vgdraw.XRight, vgdraw.YCenter
		if every := int(math.Ceil(float64(1.5 * sty.Height("0") / slot))); every > 1 {
			for i := range labels {
				if i%every != 0 {
					labels[i] = ""
				}
			}
		}
	}
	p.NominalX(labels...)
}

// dateStops are the colours of the date ramp, earliest to latest: part
// of the inferno colour map (Smith and van der Walt, matplotlib 2.0,
// 2015; its values at 0.625, 0.5, 0.375, 0.25 and 0.125), orange-red to
// deep purple. Its lightness falls steadily, so dates read in order also
// without colour vision, and its lightest colour keeps a contrast of 3:1
// with MapBackground (the map's "none").
var dateStops = []color.RGBA{{0xe3, 0x59, 0x33, 255}, {0xba, 0x36, 0x55, 255}, {0x88, 0x22, 0x6a, 255}, {0x55, 0x0f, 0x6d, 255}, {0x1f, 0x0c, 0x48, 255}}

// DateColours returns n colours for n dates, earliest to latest, evenly
// spread along dateStops (a single date takes the first).
func DateColours(n int) []color.RGBA {
	out := make([]color.RGBA, n)
	for i := range out {
		f := 0.0
		if n > 1 {
			f = float64(i) / float64(n-1) * float64(len(dateStops)-1)
		}
		j := min(int(f), len(dateStops)-2)
		u := f - float64(j)
		mix := func(a, b uint8) uint8 { return uint8(float64(a) + u*(float64(b)-float64(a)) + 0.5) }
		a, b := dateStops[j], dateStops[j+1]
		out[i] = color.RGBA{mix(a.R, b.R), mix(a.G, b.G), mix(a.B, b.B), 255}
	}
	return out
}

// DateMap draws a w x h map of values 0 (none, MapBackground) or 1..n
// (the n-th colour), with a legend row of swatches under it, one per
// label.
func DateMap(w, h int, values []uint8, colours []color.RGBA, labels []string) *image.RGBA {
	return DateMapLayout(w, h, values, colours, labels).Image
}

// DateMapLayout is DateMap's image with the boxes of its text.
func DateMapLayout(w, h int, values []uint8, colours []color.RGBA, labels []string) Layout {
	img := image.NewRGBA(image.Rect(0, 0, w, h))
	for i, v := range values[:w*h] {
		c := MapBackground
		if v > 0 && int(v) <= len(colours) {
			c = colours[v-1]
		}
		img.SetRGBA(i%w, i/w, c)
	}
	// The legend: a row per date, its swatch and its label.
	legendH := 2*panelPad + len(labels)*panelRow
	out := image.NewRGBA(image.Rect(0, 0, w, h+legendH))
	draw.Draw(out, image.Rect(0, 0, w, h), img, image.Point{}, draw.Src)
	face := font.DefaultCache.Lookup(sansFont, vg.Length(annotateSize))
	c := newRecorder(vgimg.NewWith(vgimg.UseWH(vg.Length(w), vg.Length(legendH)), vgimg.UseDPI(72), vgimg.UseBackgroundColor(panelColour)))
	for i, l := range labels {
		mid := float64(legendH - panelPad - i*panelRow - panelRow/2)
		x := float64(panelPad)
		swatch(c, x, mid, colours[i])
		c.SetColor(inkColour)
		c.FillString(face, vg.Point{X: vg.Length(x + swatchSide + itemGap), Y: vg.Length(mid - 0.36*annotateSize)}, l)
	}
	panel := c.layout()
	draw.Draw(out, image.Rect(0, h, w, h+legendH), panel.Image, image.Point{}, draw.Src)
	return Layout{Image: out, Text: shifted(panel.Text, image.Pt(0, h))}
}
