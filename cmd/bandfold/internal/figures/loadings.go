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
}

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
	c := newCanvas(loadingsWidth, height)
	dc := draw.New(c)
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
