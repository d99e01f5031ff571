package figures

import (
	"errors"
	"fmt"
	"image/png"
	"io"
	"math"
	"slices"
	"strconv"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/font"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/text"
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
// estimated size ratio (log scale) against the predicted RMSE (log scale
// when it spans a factor of 10 or more), one point per k, a few of them
// labelled (see labelPoints), the budget as a dashed vertical line, and
// the legend under the plot.
func Rate(w io.Writer, r RateData) error {
	l, err := RateLayout(r)
	if err != nil {
		return err
	}
	return png.Encode(w, l.Image)
}

// RateLayout is Rate's figure with the boxes of its text.
func RateLayout(r RateData) (Layout, error) {
	xy, ks := ratePoints(r)
	if len(xy) == 0 {
		return Layout{}, errors.New("figures: rate: no point with a positive error and size ratio")
	}
	title := r.Title
	if title == "" {
		title = "Estimated size ratio against error"
	}
	// Logarithmic axes are drawn as linear axes of log10 values with
	// decade ticks: gonum/plot places the glyph box of a log axis's label
	// at the arithmetic middle of the range, and pads the plot for it.
	p, leg := newPlot(title), newLegend()
	p.X.Label.Text = "predicted RMSE (data units)"
	p.Y.Label.Text = "estimated size ratio (stored bits / coded bits, log scale)"
	p.Y.Tick.Marker = decadeTicks{}
	lo, hi := extent(xy, func(v plotter.XY) float64 { return v.X })
	logX := hi >= 10*lo
	if logX {
		p.X.Tick.Marker = decadeTicks{}
		p.X.Label.Text = "predicted RMSE (data units, log scale)"
	}
	at := func(x float64) float64 {
		if logX {
			return math.Log10(x)
		}
		return x
	}
	for i := range xy {
		xy[i] = plotter.XY{X: at(xy[i].X), Y: math.Log10(xy[i].Y)}
	}
	p.Add(plotter.NewGrid())
	line, pts, err := plotter.NewLinePoints(xy)
	if err != nil {
		return Layout{}, err
	}
	line.Color, line.Width = cumColour, vg.Points(1.5)
	pts.Color, pts.Shape, pts.Radius = cumColour, draw.CircleGlyph{}, vg.Points(3)
	p.Add(line, pts)
	leg.Add("one point per number of kept components k, a few labelled", line, pts)
	if r.Budget > 0 {
		lo, hi := extent(xy, func(v plotter.XY) float64 { return v.Y })
		mark, err := plotter.NewLine(plotter.XYs{{X: at(r.Budget), Y: lo}, {X: at(r.Budget), Y: hi}})
		if err != nil {
			return Layout{}, err
		}
		mark.Color, mark.Width = stickColour, vg.Points(2)
		mark.Dashes = []vg.Length{vg.Points(7), vg.Points(4)}
		p.Add(mark)
		leg.Add(fmt.Sprintf("budget rmse %.4g", r.Budget), mark)
	}
	c := newRecorder(newCanvas(rateWidth, rateHeight))
	area := drawBelow(p, leg, padded(draw.New(c)))
	labelPoints(p, area, xy, ks)
	return c.layout(), nil
}

// ratePoints returns the points of r with a positive, finite error and
// size ratio, and their k.
func ratePoints(r RateData) (plotter.XYs, []int) {
	var xy plotter.XYs
	var ks []int
	for i, k := range r.K {
		x, y := r.RMSE[i], r.Ratio[i]
		if x > 0 && y > 0 && !math.IsInf(x, 0) && !math.IsInf(y, 0) {
			xy = append(xy, plotter.XY{X: x, Y: y})
			ks = append(ks, k)
		}
	}
	return xy, ks
}

// decadeTicks marks an axis of log10 values: a labelled tick at each power
// of ten, and unlabelled ones at its multiples 2 to 9; a range within one
// decade also labels the multiples 2 and 5.
type decadeTicks struct{}

// Ticks returns the ticks between lo and hi (log10 values).
func (decadeTicks) Ticks(lo, hi float64) []plot.Tick {
	few := math.Floor(hi)-math.Ceil(lo) < 1
	var out []plot.Tick
	for e := math.Floor(lo); e <= math.Ceil(hi); e++ {
		for m := 1.0; m <= 9; m++ {
			v := e + math.Log10(m)
			if v < lo || v > hi {
				continue
			}
			t := plot.Tick{Value: v}
			if m == 1 || few && (m == 2 || m == 5) {
				t.Label = strconv.FormatFloat(m*math.Pow(10, e), 'g', -1, 64)
			}
			out = append(out, t)
		}
	}
	return out
}

// extent returns the smallest and largest of f over xy.
func extent(xy plotter.XYs, f func(plotter.XY) float64) (lo, hi float64) {
	lo, hi = f(xy[0]), f(xy[0])
	for _, v := range xy {
		lo, hi = min(lo, f(v)), max(hi, f(v))
	}
	return lo, hi
}

// labelOrder returns the indices of ks in the order their points are
// offered a label: round numbers of components first (1, 2, 3, 5, 10, 20,
// 50, 100, ...), then the largest k, then the others from the smallest.
func labelOrder(ks []int) []int {
	rank := func(k int) int {
		for i, m := 0, 1; m <= k; i, m = i+3, m*10 {
			switch k {
			case m:
				return i
			case 2 * m:
				return i + 1
			case 5 * m:
				return i + 2
			}
		}
		if k == slices.Max(ks) {
			return 1000
		}
		return 1001 + k
	}
	order := make([]int, len(ks))
	for i := range order {
		order[i] = i
	}
	slices.SortStableFunc(order, func(a, b int) int { return rank(ks[a]) - rank(ks[b]) })
	return order
}

// labelPoints writes "k=…" beside points of xy, in labelOrder, each where
// its text stays inside the data area and clears every point and the
// labels already written (below right of its point, clear of a curve
// that falls to the left as k grows, else above left, above right, below
// left); a point with no such place stays unlabelled.
// area is the canvas p was drawn in.
func labelPoints(p *plot.Plot, area draw.Canvas, xy plotter.XYs, ks []int) {
	da := p.DataCanvas(area)
	tx, ty := p.Transforms(&da)
	dots := make([]vg.Point, len(xy))
	for i, v := range xy {
		dots[i] = vg.Point{X: tx(v.X), Y: ty(v.Y)}
	}
	gap, clear := vg.Points(4), vg.Points(4)
	var placed []vg.Rectangle
	for _, i := range labelOrder(ks) {
		label := fmt.Sprintf("k=%d", ks[i])
		for _, place := range [][2]float64{{1, -1}, {-1, 1}, {1, 1}, {-1, -1}} {
			sty := text.Style{Font: font.From(sansFont, tickSize), Color: inkColour, Handler: plot.DefaultTextHandler,
				XAlign: draw.XAlignment(min(place[0], 0)), YAlign: draw.YAlignment(min(place[1], 0))}
			at := dots[i].Add(vg.Point{X: gap * vg.Length(place[0]), Y: gap * vg.Length(place[1])})
			box := sty.Rectangle(label).Add(at)
			if !inside(box, da.Rectangle) || slices.ContainsFunc(placed, func(r vg.Rectangle) bool { return overlap(r, grow(box, gap)) }) ||
				slices.ContainsFunc(dots, func(d vg.Point) bool { return closeTo(box, d, clear) }) {
				continue
			}
			da.FillText(sty, at, label)
			placed = append(placed, box)
			break
		}
	}
}

// inside reports whether a lies within b.
func inside(a, b vg.Rectangle) bool {
	return a.Min.X >= b.Min.X && a.Min.Y >= b.Min.Y && a.Max.X <= b.Max.X && a.Max.Y <= b.Max.Y
}

// grow returns r grown by m on every side.
func grow(r vg.Rectangle, m vg.Length) vg.Rectangle {
	return vg.Rectangle{Min: vg.Point{X: r.Min.X - m, Y: r.Min.Y - m}, Max: vg.Point{X: r.Max.X + m, Y: r.Max.Y + m}}
}

// overlap reports whether two rectangles share any area.
func overlap(a, b vg.Rectangle) bool {
	return a.Min.X < b.Max.X && b.Min.X < a.Max.X && a.Min.Y < b.Max.Y && b.Min.Y < a.Max.Y
}

// closeTo reports whether point d lies within r grown by m on every side.
func closeTo(r vg.Rectangle, d vg.Point, m vg.Length) bool {
	return d.X > r.Min.X-m && d.X < r.Max.X+m && d.Y > r.Min.Y-m && d.Y < r.Max.Y+m
}
