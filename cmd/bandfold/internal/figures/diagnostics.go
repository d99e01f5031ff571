package figures

import (
	"errors"
	"fmt"
	"image/color"
	"math"
	"slices"

	"gonum.org/v1/gonum/stat/distuv"
	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
)

// Diagnostics figure size in pixels, histogram bins and QQ points.
const (
	diagWidth  = 1400
	diagHeight = 700
	diagBins   = 80
	qqPoints   = 400
)

// DiagnosticsData is the input of Diagnostics.
type DiagnosticsData struct {
	// Z are the change statistics of a sample of pixels.
	Z []float64
	// K is the number of degrees of freedom of the no-change model.
	K int
	// Threshold is the cut on Z.
	Threshold float64
	// Title heads the figure.
	Title string
}

var thresholdColour = color.RGBA{0xd6, 0x28, 0x78, 0xff}

// Diagnostics draws, side by side, the histogram of Z (as a density)
// against the chi-square density with K degrees of freedom with the
// threshold marked, and a QQ plot of the sample's quantiles of Z against
// the chi-square quantiles (gonum's distuv.ChiSquared), each with its
// legend under it, and returns the PNG. Points above the diagonal at the
// top of the QQ panel are tails heavier than chi-square, common on real
// pairs.
func Diagnostics(d DiagnosticsData) ([]byte, error) {
	l, err := DiagnosticsLayout(d)
	if err != nil {
		return nil, err
	}
	return encodePNG(l.Image)
}

// DiagnosticsLayout is Diagnostics' figure with the boxes of its text.
func DiagnosticsLayout(d DiagnosticsData) (Layout, error) {
	if len(d.Z) < 2 || d.K < 1 {
		return Layout{}, errors.New("figures: diagnostics: need at least 2 Z values and k >= 1")
	}
	z := slices.Clone(d.Z)
	slices.Sort(z)
	chi := distuv.ChiSquared{K: float64(d.K)}
	hi := math.Max(chi.Quantile(0.999), d.Threshold) * 1.25
	hist, histLeg, err := zHistogram(z, chi, d.Threshold, hi)
	if err != nil {
		return Layout{}, err
	}
	hist.Title.Text = d.Title
	if hist.Title.Text == "" {
		hist.Title.Text = "sampled Z against the chi-square no-change model"
	}
	qq, qqLeg, err := qqPlot(z, chi, d.Threshold)
	if err != nil {
		return Layout{}, err
	}
	c := newRecorder(newCanvas(diagWidth, diagHeight))
	dc := draw.New(c)
	tiles := draw.Tiles{Rows: 1, Cols: 2, PadX: vg.Points(16), PadY: vg.Points(8), PadTop: vg.Points(8), PadBottom: vg.Points(8), PadLeft: vg.Points(8), PadRight: vg.Points(8)}
	drawBelow(hist, histLeg, tiles.At(dc, 0, 0))
	drawBelow(qq, qqLeg, tiles.At(dc, 1, 0))
	return c.layout(), nil
}

// zHistogram is the density histogram of sorted z on [0, hi) with the
// chi-square density and the threshold.
func zHistogram(z []float64, chi distuv.ChiSquared, cut, hi float64) (*plot.Plot, plot.Legend, error) {
	p, leg := newPlot(""), newLegend()
	p.X.Label.Text = "Z"
	p.Y.Label.Text = "density"
	width := hi / diagBins
	vals := make(plotter.Values, diagBins)
	above := 0
	for _, v := range z {
		if v >= hi {
			above++
			continue
		}
		vals[int(v/width)]++
	}
	top := 0.0
	for i := range vals {
		vals[i] /= float64(len(z)) * width
		top = math.Max(top, vals[i])
	}
	hist := make(plotter.XYs, 0, 2*diagBins)
	for i, v := range vals {
		hist = append(hist, plotter.XY{X: float64(i) * width, Y: v}, plotter.XY{X: float64(i+1) * width, Y: v})
	}
	h, err := plotter.NewLine(hist)
	if err != nil {
		return nil, plot.Legend{}, err
	}
	h.Color, h.Width = barColour, vg.Points(2)
	var dens plotter.XYs
	for i := 1; i <= 400; i++ {
		x := hi * float64(i) / 400
		dens = append(dens, plotter.XY{X: x, Y: chi.Prob(x)})
		top = math.Max(top, math.Min(chi.Prob(x), 4*top+1e-300))
	}
	l, err := plotter.NewLine(dens)
	if err != nil {
		return nil, plot.Legend{}, err
	}
	l.Color, l.Width = inkColour, vg.Points(1.5)
	mark, err := plotter.NewLine(plotter.XYs{{X: cut, Y: 0}, {X: cut, Y: top * 1.05}})
	if err != nil {
		return nil, plot.Legend{}, err
	}
	mark.Color, mark.Width, mark.Dashes = thresholdColour, vg.Points(2), []vg.Length{vg.Points(6), vg.Points(4)}
	p.Add(plotter.NewGrid(), h, l, mark)
	leg.Add("sampled Z", h)
	leg.Add(fmt.Sprintf("chi-square density, k = %d", int(chi.K)), l)
	leg.Add(fmt.Sprintf("threshold Z = %.4g", cut), mark)
	leg.Add(fmt.Sprintf("%d of %d beyond the axis", above, len(z)))
	p.X.Min, p.X.Max, p.Y.Min, p.Y.Max = 0, hi, 0, top*1.1
	return p, leg, nil
}

// qqPlot plots the sample quantiles of sorted z against chi-square ones.
func qqPlot(z []float64, chi distuv.ChiSquared, cut float64) (*plot.Plot, plot.Legend, error) {
	p, leg := newPlot("QQ: sample Z against chi-square quantiles"), newLegend()
	p.X.Label.Text = fmt.Sprintf("chi-square quantile (k = %d)", int(chi.K))
	p.Y.Label.Text = "sample quantile of Z"
	n := min(qqPoints, len(z))
	pts := make(plotter.XYs, n)
	// The axes end at twice the largest of the last chi-square quantile
	// and the threshold: sample quantiles beyond (change, heavy tails) are
	// drawn on the top edge.
	top := 2 * math.Max(chi.Quantile((float64(n)-0.5)/float64(n)), cut)
	clipped := 0
	for i := range n {
		q := (float64(i) + 0.5) / float64(n)
		j := min(len(z)-1, int(q*float64(len(z))))
		pts[i] = plotter.XY{X: chi.Quantile(q), Y: math.Min(z[j], top)}
		if z[j] > top {
			clipped++
		}
	}
	s, err := plotter.NewScatter(pts)
	if err != nil {
		return nil, plot.Legend{}, err
	}
	s.GlyphStyle.Color, s.GlyphStyle.Shape, s.GlyphStyle.Radius = barColour, draw.CircleGlyph{}, vg.Points(2.5)
	diag, err := plotter.NewLine(plotter.XYs{{X: 0, Y: 0}, {X: top, Y: top}})
	if err != nil {
		return nil, plot.Legend{}, err
	}
	diag.Color = inkColour
	mark, err := plotter.NewLine(plotter.XYs{{X: 0, Y: cut}, {X: top, Y: cut}})
	if err != nil {
		return nil, plot.Legend{}, err
	}
	mark.Color, mark.Dashes = thresholdColour, []vg.Length{vg.Points(6), vg.Points(4)}
	p.Add(plotter.NewGrid(), diag, mark, s)
	leg.Add("quantiles", s)
	leg.Add("chi-square fit (y = x)", diag)
	leg.Add("threshold", mark)
	if clipped > 0 {
		leg.Add(fmt.Sprintf("%d of %d quantiles beyond the axis, on the top edge", clipped, n))
	}
	p.X.Min, p.Y.Min, p.X.Max, p.Y.Max = 0, 0, top, top*1.02
	return p, leg, nil
}
