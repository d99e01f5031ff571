package figures

import (
	"errors"
	"fmt"
	"io"
	"math"
	"slices"
	"strings"

	"bandfold/transform"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
)

// Scree figure size in pixels and the default number of components drawn.
const (
	screeWidth     = 1000
	screeHeight    = 1000 // two panels: shares above, log eigenvalues below
	defaultShown   = 30
	screeYHeadroom = 1.12 // top of the y axis, leaves room for the k label
)

// ScreeData is the input of Scree.
type ScreeData struct {
	// Title heads the figure; empty means a generic title. Detail, when
	// set, follows it in parentheses, together with the truncation note
	// (one set of parentheses in all).
	Title, Detail string
	// Eigenvalues of all p components, in component order (PC1 first).
	// Small negative values from round-off count as zero.
	Eigenvalues []float64
	// Chosen is the number of kept components k, marked on the plot;
	// 0 draws no marker.
	Chosen int
	// MaxShown caps the number of components drawn (default 30); the
	// title then says "first N of p". The chosen k is always shown.
	MaxShown int
}

// screeView holds the data series of a scree plot.
type screeView struct {
	shares     []float64 // share of total variance per component, all p
	cumulative []float64 // running sum of shares, all p
	stick      []float64 // broken-stick expected shares, all p
	eigen      []float64 // eigenvalues, all p, clamped to a positive floor for the log axis
	shown      int       // components drawn: 1..shown
	markerX    float64   // x of the chosen-k marker; 0 means none
	title      string
}

// screeSeries computes the plotted series from s. Shares are fractions
// of the total variance of all p components, in the given order.
func screeSeries(s ScreeData) (screeView, error) {
	p := len(s.Eigenvalues)
	if p == 0 {
		return screeView{}, errors.New("figures: scree: no eigenvalues")
	}
	if s.Chosen < 0 || s.Chosen > p {
		return screeView{}, fmt.Errorf("figures: scree: chosen k=%d outside 0..%d", s.Chosen, p)
	}
	var total float64
	for i, v := range s.Eigenvalues {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return screeView{}, fmt.Errorf("figures: scree: eigenvalue %d is %v", i+1, v)
		}
		total += math.Max(v, 0)
	}
	if total <= 0 {
		return screeView{}, errors.New("figures: scree: eigenvalues sum to zero")
	}
	v := screeView{
		shares:     make([]float64, p),
		cumulative: make([]float64, p),
		stick:      transform.BrokenStickShares(p),
	}
	var run float64
	for i, e := range s.Eigenvalues {
		v.shares[i] = math.Max(e, 0) / total
		run += v.shares[i]
		v.cumulative[i] = run
	}
	maxShown := s.MaxShown
	if maxShown <= 0 {
		maxShown = defaultShown
	}
	v.shown = max(min(p, maxShown), s.Chosen)
	v.markerX = float64(s.Chosen)
	v.title = s.Title
	if v.title == "" {
		v.title = "Variance by principal component"
	}
	var detail []string
	if s.Detail != "" {
		detail = append(detail, s.Detail)
	}
	if v.shown < p {
		detail = append(detail, fmt.Sprintf("first %d of %d components", v.shown, p))
	}
	if len(detail) > 0 {
		// On a line of its own: a file name and the detail do not fit on
		// one line of the figure.
		v.title = fmt.Sprintf("%s\n(%s)", v.title, strings.Join(detail, ", "))
	}
	// Zero and round-off negative eigenvalues sit at a floor a millionth of
	// the largest, so the log axis stays finite.
	floor := 1e-6 * slices.Max(s.Eigenvalues)
	v.eigen = make([]float64, p)
	for i, e := range s.Eigenvalues {
		v.eigen[i] = math.Max(e, floor)
	}
	return v, nil
}

// Scree writes a scree plot of s as PNG (1000×1000 px) to w. The upper
// panel has bars of the share of variance per component, the cumulative
// share as a line with points, the broken-stick reference as a dashed line
// and a dashed vertical marker at the chosen k; the lower panel has every
// eigenvalue on a log axis, where the small ones a linear axis flattens to
// zero stay apart.
func Scree(w io.Writer, s ScreeData) error {
	v, err := screeSeries(s)
	if err != nil {
		return err
	}
	p, err := screePlot(v)
	if err != nil {
		return err
	}
	lp, err := screeLogPlot(v)
	if err != nil {
		return err
	}
	c := newCanvas(screeWidth, screeHeight)
	dc := draw.New(c)
	const upper = 0.58 // of the height, for the panel with the title and legend
	top := draw.Crop(dc, 0, 0, px((1-upper)*screeHeight), 0)
	bottom := draw.Crop(dc, 0, 0, 0, -px(upper*screeHeight))
	alignPanels([]*plot.Plot{p, lp}, []*draw.Canvas{&top, &bottom})
	p.Draw(top)
	lp.Draw(bottom)
	return writeCanvas(w, c)
}

// alignPanels narrows the canvases of plots stacked one above the other so
// that their data areas share left and right edges: each gets the widest
// left and right margins (tick labels, axis labels) of them all.
func alignPanels(plots []*plot.Plot, cs []*draw.Canvas) {
	var left, right vg.Length
	for i, p := range plots {
		d := p.DataCanvas(*cs[i])
		left, right = max(left, d.Min.X-cs[i].Min.X), max(right, cs[i].Max.X-d.Max.X)
	}
	for i, p := range plots {
		d := p.DataCanvas(*cs[i])
		cs[i].Min.X += left - (d.Min.X - cs[i].Min.X)
		cs[i].Max.X -= right - (cs[i].Max.X - d.Max.X)
	}
}

// screeLogPlot is the lower panel: every eigenvalue on a log axis, with the
// chosen k marked.
func screeLogPlot(v screeView) (*plot.Plot, error) {
	n := len(v.eigen)
	p := newPlot("")
	p.X.Label.Text = "component"
	p.Y.Label.Text = "eigenvalue (log scale)"
	p.X.Min, p.X.Max = 0.4, float64(n)+0.6
	p.X.Tick.Marker = componentTicks(n)
	p.Y.Scale = plot.LogScale{}
	p.Y.Tick.Marker = plot.LogTicks{Prec: 1}
	p.Add(plotter.NewGrid())
	line, pts, err := plotter.NewLinePoints(indexXYs(v.eigen))
	if err != nil {
		return nil, err
	}
	line.Color, line.Width = barColour, vg.Points(2)
	pts.Color, pts.Shape, pts.Radius = barColour, draw.CircleGlyph{}, vg.Points(min(3, 60/float64(n)+1))
	p.Add(line, pts)
	p.Legend.Add("eigenvalue", line, pts)
	if v.markerX > 0 {
		lo, hi := slices.Min(v.eigen), slices.Max(v.eigen)
		mark, err := plotter.NewLine(plotter.XYs{{X: v.markerX, Y: lo}, {X: v.markerX, Y: hi}})
		if err != nil {
			return nil, err
		}
		mark.Color, mark.Width = inkColour, vg.Points(1.5)
		mark.Dashes = []vg.Length{vg.Points(3), vg.Points(3)}
		p.Add(mark)
		p.Legend.Add(fmt.Sprintf("chosen k = %d", int(v.markerX)), mark)
	}
	p.Legend.Top = true
	p.Legend.XOffs, p.Legend.YOffs = -px(12), -px(12)
	p.Legend.Padding = vg.Points(3)
	return p, nil
}

// screePlot assembles the gonum plot for v.
func screePlot(v screeView) (*plot.Plot, error) {
	n := v.shown
	p := newPlot(v.title)
	p.X.Label.Text = "component"
	p.Y.Label.Text = "share of total variance"
	p.X.Min, p.X.Max = 0.4, float64(n)+0.6
	p.Y.Min, p.Y.Max = 0, screeYHeadroom
	p.X.Tick.Marker = componentTicks(n)
	p.Y.Tick.Marker = plot.ConstantTicks(fractionTicks())
	p.Add(plotter.NewGrid())

	// Plot area is roughly the canvas less ~140 px of axes and margins.
	barW := px(0.6 * float64(screeWidth-140) / float64(n))
	bars, err := plotter.NewBarChart(plotter.Values(v.shares[:n]), barW)
	if err != nil {
		return nil, err
	}
	bars.XMin = 1
	bars.Color = barColour
	bars.LineStyle.Width = 0

	cum, pts, err := plotter.NewLinePoints(indexXYs(v.cumulative[:n]))
	if err != nil {
		return nil, err
	}
	cum.Color, cum.Width = cumColour, vg.Points(2)
	pts.Color, pts.Shape, pts.Radius = cumColour, draw.CircleGlyph{}, vg.Points(3)

	stick, err := plotter.NewLine(indexXYs(v.stick[:n]))
	if err != nil {
		return nil, err
	}
	stick.Color, stick.Width = stickColour, vg.Points(2)
	stick.Dashes = []vg.Length{vg.Points(7), vg.Points(4)}

	p.Add(bars, stick, cum, pts)
	p.Legend.Add("share of variance", bars)
	p.Legend.Add("cumulative share", cum, pts)
	p.Legend.Add("broken-stick reference", stick)

	if v.markerX > 0 {
		k := v.markerX
		mark, err := plotter.NewLine(plotter.XYs{{X: k, Y: 0}, {X: k, Y: 1.02}})
		if err != nil {
			return nil, err
		}
		mark.Color, mark.Width = inkColour, vg.Points(1.5)
		mark.Dashes = []vg.Length{vg.Points(3), vg.Points(3)}
		label := fmt.Sprintf("k = %d kept (%.1f %% of variance)", int(k), 100*v.cumulative[int(k)-1])
		lab, err := plotter.NewLabels(plotter.XYLabels{
			XYs:    plotter.XYs{{X: k, Y: 1.03}},
			Labels: []string{label},
		})
		if err != nil {
			return nil, err
		}
		st := &lab.TextStyle[0]
		st.Font.Typeface, st.Font.Variant, st.Font.Size = sansFont.Typeface, sansFont.Variant, vg.Points(legendSize)
		st.Color = inkColour
		st.YAlign = draw.YBottom
		if k > 0.6*float64(n) {
			st.XAlign = draw.XRight // keep the label inside the plot
		}
		p.Add(mark, lab)
		p.Legend.Add("chosen k", mark)
	}
	// Legend on the right, lifted clear of the small trailing bars.
	p.Legend.Top = false
	p.Legend.YOffs = px(140)
	p.Legend.XOffs = -px(12)
	p.Legend.Padding = vg.Points(3)
	return p, nil
}

// indexXYs places ys at x = 1, 2, …
func indexXYs(ys []float64) plotter.XYs {
	xy := make(plotter.XYs, len(ys))
	for i, y := range ys {
		xy[i] = plotter.XY{X: float64(i + 1), Y: y}
	}
	return xy
}

// componentTicks labels component 1 and every fifth component (every
// component when there are few), with minor ticks in between.
func componentTicks(n int) plot.Ticker {
	step := 5
	switch {
	case n <= 15:
		step = 1
	case n > 60:
		step = 10
	}
	ticks := make([]plot.Tick, 0, n)
	for i := 1; i <= n; i++ {
		t := plot.Tick{Value: float64(i)}
		if i == 1 || i%step == 0 {
			t.Label = fmt.Sprint(i)
		}
		ticks = append(ticks, t)
	}
	return plot.ConstantTicks(ticks)
}

// fractionTicks labels 0, 0.2, …, 1 on the share axis.
func fractionTicks() []plot.Tick {
	var ticks []plot.Tick
	for i := 0; i <= 10; i++ {
		t := plot.Tick{Value: float64(i) / 10}
		if i%2 == 0 {
			t.Label = fmt.Sprintf("%.1f", t.Value)
		}
		ticks = append(ticks, t)
	}
	return ticks
}
