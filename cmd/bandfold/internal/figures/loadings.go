package figures

import (
	"errors"
	"fmt"
	"image/color"
	"io"
	"math"
	"slices"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
)

// Loadings figure geometry in pixels.
const (
	loadingsWidth   = 1200
	colourBarStrip  = 170 // right-hand strip holding the colour bar
	maxBandLabels   = 40  // band tick labels drawn at most
	minLoadingsRows = 560
)

// LoadingsData is the input of Loadings.
type LoadingsData struct {
	// Title heads the figure; empty means a generic title.
	Title string
	// BandNames label the bands (names or wavelengths); empty means
	// "B1", "B2", …
	BandNames []string
	// Vectors holds one row per component: row i is component i's
	// loadings over the bands.
	Vectors [][]float64
	// Components is the number of kept components drawn (the first
	// Components rows); 0 means all rows.
	Components int
	// WavelengthsNM, when set (one per band, increasing), adds a spectral
	// panel below the heat map: each kept component's loading against
	// wavelength, one line per component, broken across gaps in the bands
	// (excluded absorption windows).
	WavelengthsNM []float64
}

// spectralHeight is the height in pixels of the spectral panel, and
// maxSpectralLines the components drawn in it at most (more lines than
// that cannot be told apart).
const (
	spectralHeight   = 480
	maxSpectralLines = 8
)

// loadingCells is the heat-map grid: columns are bands (x = band
// index), rows are components with PC1 on top, and limit is the
// symmetric colour limit max|loading|.
type loadingCells struct {
	vals  [][]float64 // [component][band], k rows
	names []string    // one per band
	limit float64
}

// loadingGrid validates l and arranges its kept loadings for plotting.
func loadingGrid(l LoadingsData) (*loadingCells, error) {
	k := l.Components
	if k == 0 {
		k = len(l.Vectors)
	}
	if k <= 0 || k > len(l.Vectors) {
		return nil, fmt.Errorf("figures: loadings: %d components requested, %d given", l.Components, len(l.Vectors))
	}
	p := len(l.Vectors[0])
	if p == 0 {
		return nil, errors.New("figures: loadings: no bands")
	}
	if len(l.BandNames) != 0 && len(l.BandNames) != p {
		return nil, fmt.Errorf("figures: loadings: %d band names for %d bands", len(l.BandNames), p)
	}
	g := &loadingCells{vals: l.Vectors[:k], names: l.BandNames}
	for i, row := range g.vals {
		if len(row) != p {
			return nil, fmt.Errorf("figures: loadings: component %d has %d bands, want %d", i+1, len(row), p)
		}
		for j, v := range row {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return nil, fmt.Errorf("figures: loadings: PC%d band %d is %v", i+1, j+1, v)
			}
			g.limit = math.Max(g.limit, math.Abs(v))
		}
	}
	if g.names == nil {
		g.names = make([]string, p)
		for j := range g.names {
			g.names[j] = fmt.Sprintf("B%d", j+1)
		}
	}
	return g, nil
}

// Dims returns (bands, components).
func (g *loadingCells) Dims() (c, r int) { return len(g.vals[0]), len(g.vals) }

// Z returns the loading of band c on the component drawn in row r;
// row 0 is the bottom row, which holds the last kept component.
func (g *loadingCells) Z(c, r int) float64 { return g.vals[len(g.vals)-1-r][c] }

// X returns the band index.
func (g *loadingCells) X(c int) float64 { return float64(c) }

// Y returns the row index.
func (g *loadingCells) Y(r int) float64 { return float64(r) }

// component returns the 1-based component number drawn in row r.
func (g *loadingCells) component(r int) int { return len(g.vals) - r }

// Loadings writes a heat map of the kept loadings as PNG to w: bands
// along the horizontal axis, components PC1..PCk down the vertical
// axis (PC1 on top), coloured on a diverging scale symmetric about
// zero (blue negative, off-white zero, red positive) with a colour bar.
func Loadings(w io.Writer, l LoadingsData) error {
	g, err := loadingGrid(l)
	if err != nil {
		return err
	}
	bands, k := g.Dims()
	title := l.Title
	if title == "" {
		title = fmt.Sprintf("Band loadings of the %d kept components", k)
	}
	cm := newDiverging(g.limit)

	p := newPlot(title)
	p.X.Label.Text = "band"
	p.Y.Label.Text = "component"
	p.X.Tick.Marker = plot.ConstantTicks(bandTicks(g.names))
	if bandLabelsRotated(g.names, bands) {
		p.X.Tick.Label.Rotation = math.Pi / 2
		p.X.Tick.Label.XAlign = draw.XRight
		p.X.Tick.Label.YAlign = draw.YCenter
	}
	rows := make([]plot.Tick, k)
	for r := range rows {
		rows[r] = plot.Tick{Value: float64(r), Label: fmt.Sprintf("PC%d", g.component(r))}
	}
	p.Y.Tick.Marker = plot.ConstantTicks(rows)
	p.X.Padding, p.Y.Padding = 0, 0
	p.Add(&heatCells{grid: g, cm: cm})

	bar := newPlot("")
	bar.HideX()
	bar.Y.Label.Text = "loading"
	bar.Add(&plotter.ColorBar{ColorMap: cm, Vertical: true})

	height := loadingsHeight(k)
	var sp *plot.Plot
	var leg plot.Legend
	if l.WavelengthsNM != nil {
		if len(l.WavelengthsNM) != bands {
			return fmt.Errorf("figures: loadings: %d wavelengths for %d bands", len(l.WavelengthsNM), bands)
		}
		if sp, leg, err = spectralPlot(g, l.WavelengthsNM); err != nil {
			return err
		}
		height += spectralHeight
	}
	c := newCanvas(loadingsWidth, height)
	dc := draw.New(c)
	if sp != nil {
		panel := draw.Crop(dc, 0, -px(colourBarStrip), 0, -px(float64(height-spectralHeight)))
		heat := draw.Crop(dc, 0, -px(colourBarStrip), px(spectralHeight), 0)
		alignPanels([]*plot.Plot{p, sp}, []*draw.Canvas{&heat, &panel})
		sp.Draw(panel)
		// The legend sits in the strip beside the panel, clear of the lines.
		strip := dc
		strip.Min.X, strip.Max.X = panel.Max.X+px(20), dc.Max.X-px(20)
		strip.Min.Y, strip.Max.Y = sp.DataCanvas(panel).Min.Y, sp.DataCanvas(panel).Max.Y
		leg.Draw(strip)
		dc = draw.Crop(dc, 0, 0, px(spectralHeight), 0)
		dc.Min.X, dc.Max.X = heat.Min.X, heat.Max.X+px(colourBarStrip)
	}
	main := draw.Crop(dc, 0, -px(colourBarStrip), 0, 0)
	p.Draw(main)
	// Align the colour bar with the heat map's data area.
	data := p.DataCanvas(main)
	side := dc
	side.Min.X = main.Max.X + px(20)
	side.Max.X = dc.Max.X - px(40)
	side.Min.Y, side.Max.Y = data.Min.Y, data.Max.Y
	bar.Draw(side)
	return writeCanvas(w, c)
}

// heatCells draws one filled rectangle per band and component in the
// exact colour of its loading. Each cell overlaps its right and upper
// neighbours by a pixel (they are painted later), which avoids the
// hairline seams of anti-aliased edges.
type heatCells struct {
	grid *loadingCells
	cm   *diverging
}

// Plot implements plot.Plotter.
func (h *heatCells) Plot(c draw.Canvas, plt *plot.Plot) {
	trX, trY := plt.Transforms(&c)
	cols, rows := h.grid.Dims()
	overlap := px(1)
	for i := range cols {
		x0, x1 := trX(float64(i)-0.5), trX(float64(i)+0.5)
		if i < cols-1 {
			x1 += overlap
		}
		for j := range rows {
			y0, y1 := trY(float64(j)-0.5), trY(float64(j)+0.5)
			if j < rows-1 {
				y1 += overlap
			}
			col, err := h.cm.At(h.grid.Z(i, j))
			if err != nil { // cannot happen: the limit is max|loading|
				panic(err)
			}
			c.FillPolygon(col, []vg.Point{{X: x0, Y: y0}, {X: x1, Y: y0}, {X: x1, Y: y1}, {X: x0, Y: y1}})
		}
	}
}

// DataRange implements plot.DataRanger: cells are centred on integer
// band and row indices.
func (h *heatCells) DataRange() (xmin, xmax, ymin, ymax float64) {
	cols, rows := h.grid.Dims()
	return -0.5, float64(cols) - 0.5, -0.5, float64(rows) - 0.5
}

// loadingsHeight grows the figure with the number of components.
func loadingsHeight(k int) int { return min(max(minLoadingsRows, 220+30*k), 1400) }

// bandTicks labels a thinned subset of bands so labels stay readable.
func bandTicks(names []string) []plot.Tick {
	var ticks []plot.Tick
	for _, i := range thinIndices(len(names), maxBandLabels) {
		ticks = append(ticks, plot.Tick{Value: float64(i), Label: names[i]})
	}
	return ticks
}

// thinIndices returns 0, s, 2s, … below n with the smallest step s
// that yields at most maxLabels indices.
func thinIndices(n, maxLabels int) []int {
	step := max(1, (n+maxLabels-1)/maxLabels)
	idx := make([]int, 0, (n+step-1)/step)
	for i := 0; i < n; i += step {
		idx = append(idx, i)
	}
	return idx
}

// bandLabelsRotated reports whether band labels would collide when set
// horizontally: a label of the longest name (≈ 9 px per character at
// 12 pt) wider than the spacing between labelled bands.
func bandLabelsRotated(names []string, bands int) bool {
	longest := 0
	for _, n := range names {
		longest = max(longest, len([]rune(n)))
	}
	shown := len(thinIndices(bands, maxBandLabels))
	spacing := float64(loadingsWidth-colourBarStrip-120) / float64(shown)
	return float64(longest)*9+12 > spacing
}

// componentColours tell the lines of the spectral panel apart (Okabe & Ito
// 2008, colour-blind safe, with black for the first component).
var componentColours = []color.RGBA{
	{0x00, 0x00, 0x00, 0xff}, {0xe6, 0x9f, 0x00, 0xff}, {0x56, 0xb4, 0xe9, 0xff}, {0x00, 0x9e, 0x73, 0xff},
	{0xd5, 0x5e, 0x00, 0xff}, {0x00, 0x72, 0xb2, 0xff}, {0xcc, 0x79, 0xa7, 0xff}, {0x99, 0x99, 0x99, 0xff},
}

// spectralPlot draws each kept component's loadings against wavelength
// (at most maxSpectralLines components), with the lines broken where the
// band spacing jumps, and returns the plot and its legend (drawn apart).
func spectralPlot(g *loadingCells, nm []float64) (*plot.Plot, plot.Legend, error) {
	_, k := g.Dims()
	shown := min(k, maxSpectralLines)
	title := "Loadings against wavelength"
	if shown < k {
		title = fmt.Sprintf("%s (first %d of %d components)", title, shown, k)
	}
	p := newPlot(title)
	p.X.Label.Text = "wavelength (nm)"
	p.Y.Label.Text = "loading"
	p.X.Tick.Marker = plot.ConstantTicks(wavelengthTicks(nm[0], nm[len(nm)-1]))
	p.X.Min, p.X.Max = nm[0], nm[len(nm)-1]
	p.X.Padding = 0
	p.Add(plotter.NewGrid())
	leg := plot.NewLegend()
	leg.TextStyle = p.Legend.TextStyle
	leg.Top, leg.Left = true, true
	leg.Padding = vg.Points(4)
	segs := spectralSegments(nm)
	for i := range shown {
		style := draw.LineStyle{Color: componentColours[i%len(componentColours)], Width: vg.Points(2)}
		for si, sg := range segs {
			xy := make(plotter.XYs, 0, sg[1]-sg[0])
			for j := sg[0]; j < sg[1]; j++ {
				xy = append(xy, plotter.XY{X: nm[j], Y: g.vals[i][j]})
			}
			line, err := plotter.NewLine(xy)
			if err != nil {
				return nil, leg, err
			}
			line.LineStyle = style
			p.Add(line)
			if si == 0 {
				leg.Add(fmt.Sprintf("PC%d", i+1), line)
			}
		}
	}
	zero, err := plotter.NewLine(plotter.XYs{{X: nm[0], Y: 0}, {X: nm[len(nm)-1], Y: 0}})
	if err != nil {
		return nil, leg, err
	}
	zero.Color, zero.Width = inkColour, vg.Points(0.75)
	p.Add(zero)
	return p, leg, nil
}

// wavelengthTicks marks every 100 nm from lo to hi and labels every
// 200 nm (every 500 nm over spans beyond 2500 nm).
func wavelengthTicks(lo, hi float64) []plot.Tick {
	label := 200.0
	if hi-lo > 2500 {
		label = 500
	}
	var ticks []plot.Tick
	for v := math.Ceil(lo/100) * 100; v <= hi; v += 100 {
		t := plot.Tick{Value: v}
		if math.Mod(v, label) == 0 {
			t.Label = fmt.Sprint(v)
		}
		ticks = append(ticks, t)
	}
	return ticks
}

// spectralSegments splits the bands into runs [start, end) without a gap:
// a step between neighbouring wavelengths above 1.5 times the median step
// starts a new run.
func spectralSegments(nm []float64) [][2]int {
	if len(nm) < 2 {
		return [][2]int{{0, len(nm)}}
	}
	steps := make([]float64, len(nm)-1)
	for j := range steps {
		steps[j] = nm[j+1] - nm[j]
	}
	sorted := slices.Clone(steps)
	slices.Sort(sorted)
	median := sorted[len(sorted)/2]
	var out [][2]int
	start := 0
	for j, d := range steps {
		if d > 1.5*median {
			out = append(out, [2]int{start, j + 1})
			start = j + 1
		}
	}
	return append(out, [2]int{start, len(nm)})
}
