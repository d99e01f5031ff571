package figures

import (
	"errors"
	"fmt"
	"io"
	"math"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
)

// Rate figure size in pixels.
const (
	rateWidth  = 1000
	rateHeight = 600
)

// RateData is the input of Rate: one point per number of kept components.
type RateData struct {
	Title string
	// K, RMSE and Ratio are, per point, the kept components, the predicted
	// RMSE and the estimated size ratio; points with a non-positive or
	// non-finite value are left out.
	K           []int
	RMSE, Ratio []float64
	// Budget, when positive, is drawn as a vertical line.
	Budget float64
}

// Rate writes the rate–distortion plot of r as PNG (1000×600 px) to w: the
// estimated size ratio (log scale) against the predicted RMSE, one labelled
// point per k, and the budget as a dashed vertical line.
func Rate(w io.Writer, r RateData) error {
	var xy plotter.XYs
	var labels []string
	for i, k := range r.K {
		x, y := r.RMSE[i], r.Ratio[i]
		if x > 0 && y > 0 && !math.IsInf(x, 0) && !math.IsInf(y, 0) {
			xy = append(xy, plotter.XY{X: x, Y: y})
			labels = append(labels, fmt.Sprintf("k=%d", k))
		}
	}
	if len(xy) == 0 {
		return errors.New("figures: rate: no point with a positive error and size ratio")
	}
	title := r.Title
	if title == "" {
		title = "Estimated size ratio against error"
	}
	p := newPlot(title)
	p.X.Label.Text = "predicted RMSE (data units)"
	p.Y.Label.Text = "estimated size ratio (stored bits / coded bits)"
	p.Y.Scale = plot.LogScale{}
	p.Y.Tick.Marker = plot.LogTicks{Prec: -1}
	p.Add(plotter.NewGrid())
	line, pts, err := plotter.NewLinePoints(xy)
	if err != nil {
		return err
	}
	line.Color, line.Width = cumColour, vg.Points(1.5)
	pts.Color, pts.Shape, pts.Radius = cumColour, draw.CircleGlyph{}, vg.Points(3)
	lab, err := plotter.NewLabels(plotter.XYLabels{XYs: xy, Labels: labels})
	if err != nil {
		return err
	}
	for i := range lab.TextStyle {
		st := &lab.TextStyle[i]
		st.Font.Typeface, st.Font.Variant, st.Font.Size = sansFont.Typeface, sansFont.Variant, vg.Points(tickSize)
		st.Color, st.XAlign, st.YAlign = inkColour, draw.XLeft, draw.YBottom
	}
	p.Add(line, pts, lab)
	p.Legend.Add("one point per number of kept components", line, pts)
	if r.Budget > 0 {
		lo, hi := xy[0].Y, xy[0].Y
		for _, v := range xy {
			lo, hi = min(lo, v.Y), max(hi, v.Y)
		}
		mark, err := plotter.NewLine(plotter.XYs{{X: r.Budget, Y: lo}, {X: r.Budget, Y: hi}})
		if err != nil {
			return err
		}
		mark.Color, mark.Width = stickColour, vg.Points(2)
		mark.Dashes = []vg.Length{vg.Points(7), vg.Points(4)}
		p.Add(mark)
		p.Legend.Add(fmt.Sprintf("budget rmse %.4g", r.Budget), mark)
	}
	c := newCanvas(rateWidth, rateHeight)
	p.Draw(draw.New(c))
	return writeCanvas(w, c)
}
