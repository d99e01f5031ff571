package figures

import (
	"bytes"
	"errors"
	"image"
	"image/color"
	"image/draw"

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

// Bar colours of the timeline: confirmed change, and the flags not
// confirmed stacked lighter on top.
var (
	confirmedColour   = color.RGBA{180, 30, 60, 255}
	unconfirmedColour = color.RGBA{244, 180, 120, 255}
)

// TimelineData is the input of TimelineBars.
type TimelineData struct {
	// Steps name the steps on the axis ("2020-06-16").
	Steps []string
	// Confirmed and Unconfirmed are each step's mapped amounts.
	Confirmed, Unconfirmed []float64
	// Unit labels the y axis ("ha" or "pixels").
	Unit  string
	Title string
}

// TimelineBars draws the confirmed mapped change per step as bars with the
// flagged but unconfirmed change stacked lighter on top, and returns the
// PNG.
func TimelineBars(d TimelineData) ([]byte, error) {
	if len(d.Steps) == 0 || len(d.Confirmed) != len(d.Steps) || len(d.Unconfirmed) != len(d.Steps) {
		return nil, errors.New("figures: timeline: need one confirmed and one unconfirmed value per step")
	}
	p := plot.New()
	p.Title.Text = d.Title
	p.Y.Label.Text = "mapped change (" + d.Unit + ")"
	p.X.Label.Text = "step (date of the later scene)"
	w := vg.Points(float64(timelineWidth) / float64(2*len(d.Steps)+1))
	conf, err := plotter.NewBarChart(plotter.Values(d.Confirmed), w)
	if err != nil {
		return nil, err
	}
	conf.Color, conf.LineStyle.Width = confirmedColour, 0
	unconf, err := plotter.NewBarChart(plotter.Values(d.Unconfirmed), w)
	if err != nil {
		return nil, err
	}
	unconf.Color, unconf.LineStyle.Width = unconfirmedColour, 0
	unconf.StackOn(conf)
	p.Add(conf, unconf)
	p.Legend.Add("lasting", conf)
	p.Legend.Add("flagged, did not last", unconf)
	p.Legend.Top = true
	p.NominalX(d.Steps...)
	p.Y.Min = 0
	c := newCanvas(timelineWidth, timelineHeight)
	p.Draw(vgdraw.New(c))
	var buf bytes.Buffer
	if err := writeCanvas(&buf, c); err != nil {
		return nil, err
	}
	return buf.Bytes(), nil
}

// DateColours is a sequential scale of our own for n dates, from a pale
// yellow (earliest) through orange and red to a deep purple (latest).
func DateColours(n int) []color.RGBA {
	stops := []color.RGBA{{252, 232, 150, 255}, {245, 150, 60, 255}, {200, 40, 70, 255}, {90, 20, 110, 255}}
	out := make([]color.RGBA, n)
	for i := range out {
		f := 0.0
		if n > 1 {
			f = float64(i) / float64(n-1) * float64(len(stops)-1)
		}
		j := min(int(f), len(stops)-2)
		u := f - float64(j)
		mix := func(a, b uint8) uint8 { return uint8(float64(a) + u*(float64(b)-float64(a)) + 0.5) }
		a, b := stops[j], stops[j+1]
		out[i] = color.RGBA{mix(a.R, b.R), mix(a.G, b.G), mix(a.B, b.B), 255}
	}
	return out
}

// DateMap draws a w x h map of values 0 (none, light grey) or 1..n (the
// n-th colour), with a legend row of swatches under it, one per label.
func DateMap(w, h int, values []uint8, colours []color.RGBA, labels []string) *image.RGBA {
	img := image.NewRGBA(image.Rect(0, 0, w, h))
	for i, v := range values[:w*h] {
		c := color.RGBA{236, 236, 228, 255}
		if v > 0 && int(v) <= len(colours) {
			c = colours[v-1]
		}
		img.SetRGBA(i%w, i/w, c)
	}
	// The legend: a row per date, its swatch and its label.
	rows := len(labels)
	legendH := 2*panelPad + rows*panelRow
	out := image.NewRGBA(image.Rect(0, 0, w, h+legendH))
	draw.Draw(out, image.Rect(0, 0, w, h), img, image.Point{}, draw.Src)
	face := font.DefaultCache.Lookup(sansFont, vg.Length(annotateSize))
	c := vgimg.NewWith(vgimg.UseWH(vg.Length(w), vg.Length(legendH)), vgimg.UseDPI(72), vgimg.UseBackgroundColor(panelColour))
	for i, l := range labels {
		mid := float64(legendH - panelPad - i*panelRow - panelRow/2)
		var p vg.Path
		x := float64(panelPad)
		p.Move(vg.Point{X: vg.Length(x), Y: vg.Length(mid - swatchSide/2)})
		p.Line(vg.Point{X: vg.Length(x + swatchSide), Y: vg.Length(mid - swatchSide/2)})
		p.Line(vg.Point{X: vg.Length(x + swatchSide), Y: vg.Length(mid + swatchSide/2)})
		p.Line(vg.Point{X: vg.Length(x), Y: vg.Length(mid + swatchSide/2)})
		p.Close()
		c.SetColor(colours[i])
		c.Fill(p)
		c.SetColor(inkColour)
		c.FillString(face, vg.Point{X: vg.Length(x + swatchSide + itemGap), Y: vg.Length(mid - 0.36*annotateSize)}, l)
	}
	draw.Draw(out, image.Rect(0, h, w, h+legendH), c.Image(), image.Point{}, draw.Src)
	return out
}
