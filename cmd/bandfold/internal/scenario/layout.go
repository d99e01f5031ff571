package scenario

import (
	"image"
	"math"
)

// Class is a land-cover class of the catchment.
type Class uint8

// Land-cover classes. ClassMap writes these values (and ClassNoData in the
// nodata collar).
const (
	Water Class = iota
	Forest
	Grassland
	Cropland
	BareSoil
	Urban
	Wetland
	Burnt
	NumClasses = 8
)

var classNames = [NumClasses]string{"water", "forest", "grassland", "cropland", "bare soil", "urban", "wetland", "burnt"}

// String returns the lower-case class name.
func (k Class) String() string {
	if int(k) < len(classNames) {
		return classNames[k]
	}
	return "nodata"
}

// Change events; their ids are the values written by TruthIDs.
const (
	EventClearing  uint8 = 1 // forest -> bare soil
	EventReservoir uint8 = 2 // land -> water along the reservoir shore
	EventBurn      uint8 = 3 // grassland/forest -> burnt
)

// Layout constants, in fractions of the scene (centres) or of the shorter
// scene side (radii), so that every scene size shows the whole catchment.
const (
	lakeLevelBefore = 0.76 // warped-distance threshold of the reservoir, date 0
	lakeLevelAfter  = 1.00 // ... and date 1
	cropBelow       = 0.32 // elevation index under which lowland is farmed
	forestAbove     = 0.58 // elevation index over which hills are wooded
	outcropAbove    = 0.86 // elevation index over which rock may crop out
	parcelRow       = 26.0 // cropland strip depth, px
	blockSize       = 16   // town block pitch, px
)

// blob is an irregular patch: an ellipse whose normalised radius is warped
// by fBm, r' = r * (1 + warp*fbm). A pixel is inside at level t if r' < t.
type blob struct {
	cx, cy   float64 // centre, px
	a, b     float64 // semi-axes, px
	cos, sin float64
	warp     float64
	edge     field
	bounds   image.Rectangle // where r' < 1 is possible
}

func newBlob(key uint64, w, h int, cu, cv, a, b, angle, warp float64) blob {
	l := float64(min(w, h))
	bl := blob{cx: cu * float64(w), cy: cv * float64(h), a: a * l, b: b * l,
		cos: math.Cos(angle), sin: math.Sin(angle), warp: warp}
	bl.edge = newField(key, math.Max(bl.b/1.5, 4), 3)
	reach := math.Max(bl.a, bl.b)/(1-warp) + 2
	bl.bounds = image.Rect(int(bl.cx-reach), int(bl.cy-reach), int(bl.cx+reach)+1, int(bl.cy+reach)+1)
	return bl
}

// radius is the unwarped normalised elliptic radius at pixel centre (x, y).
func (bl *blob) radius(x, y int) float64 {
	dx, dy := float64(x)+0.5-bl.cx, float64(y)+0.5-bl.cy
	p := (dx*bl.cos + dy*bl.sin) / bl.a
	q := (-dx*bl.sin + dy*bl.cos) / bl.b
	return math.Sqrt(p*p + q*q)
}

// dist returns the warped radius for the window (stride w), or nil when the
// window misses the blob; pixels outside the blob bounds get 9.
func (bl *blob) dist(x0, y0, w, h int) []float32 {
	r := bl.bounds.Intersect(image.Rect(x0, y0, x0+w, y0+h))
	if r.Empty() {
		return nil
	}
	out := make([]float32, w*h)
	for i := range out {
		out[i] = 9
	}
	off := (r.Min.Y-y0)*w + r.Min.X - x0
	bl.edge.fill(out[off:], w, r.Min.X, r.Min.Y, r.Dx(), r.Dy())
	for y := r.Min.Y; y < r.Max.Y; y++ {
		row := out[(y-y0)*w:]
		for x := r.Min.X; x < r.Max.X; x++ {
			i := x - x0
			row[i] = float32(bl.radius(x, y) * (1 + bl.warp*float64(row[i])))
		}
	}
	return out
}

// layout is the scene design shared by all products: fields, patches and
// linear features. It is built once per Catchment and read-only afterwards.
type layout struct {
	w, h int
	k    float64 // scale of layout lengths: min(w, h) / 2048

	elev, moist, mix, tex, outcrop, burnSev, burnIsland field
	lake, clearing, burn, town, village, quarry         blob

	riverKey, streamKey, parcelKey, blockKey uint64
}

func newLayout(w, h int, seed uint64) *layout {
	l := float64(min(w, h))
	ly := &layout{w: w, h: h, k: l / 2048}
	key := func(label uint64) uint64 { return subKey(seed, label) }
	ly.elev = newField(key(1), l/4, 4)
	ly.moist = newField(key(2), l/6, 3)
	ly.mix = newField(key(3), 48, 3)
	ly.tex = newField(key(4), 6, 2)
	ly.outcrop = newField(key(5), 40, 3)
	ly.burnSev = newField(key(6), 36, 3)
	ly.burnIsland = newField(key(7), 30, 3)
	ly.riverKey, ly.streamKey, ly.parcelKey, ly.blockKey = key(8), key(9), key(10), key(11)

	ly.lake = newBlob(key(20), w, h, 0.30, 0.21, 0.100, 0.062, 0.35, 0.30)
	ly.clearing = newBlob(key(21), w, h, 0.75, 0.19, 0.058, 0.038, -0.30, 0.30)
	ly.burn = newBlob(key(22), w, h, 0.14, 0.46, 0.085, 0.040, 0.45, 0.35)
	townV := ly.riverY(0.56)/float64(h) - 0.065
	villageV := ly.riverY(0.12)/float64(h) + 0.07
	ly.town = newBlob(key(23), w, h, 0.56, townV, 0.055, 0.045, 0.2, 0.30)
	ly.village = newBlob(key(24), w, h, 0.12, villageV, 0.022, 0.018, -0.4, 0.30)
	ly.quarry = newBlob(key(25), w, h, 0.86, 0.36, 0.020, 0.014, 0.7, 0.35)
	return ly
}

// riverY is the row (px) of the river centre line at fraction u of the width.
func (ly *layout) riverY(u float64) float64 {
	v := 0.62 + 0.05*math.Sin(2*math.Pi*(1.3*u+0.1)) + 0.02*math.Sin(2*math.Pi*(3.7*u+0.6)) +
		0.03*fbm1(ly.riverKey, 5*u, 3)
	return v * float64(ly.h)
}

// roadY is the row (px) of the valley road at fraction u of the width.
func (ly *layout) roadY(u float64) float64 {
	return ly.riverY(u) - float64(ly.h)*(0.10+0.015*math.Sin(2*math.Pi*2.1*u))
}

// streamX is the column (px) of the stream from the reservoir to the river at
// fraction v of the height.
func (ly *layout) streamX(v float64) float64 {
	return float64(ly.w) * (0.31 + 0.012*math.Sin(2*math.Pi*4*v) + 0.012*fbm1(ly.streamKey, 6*v, 2))
}

// curve holds, per column, a curve's centre row and the factor turning a
// vertical offset into a perpendicular distance.
type curve struct{ y, norm []float64 }

func (ly *layout) curveCols(f func(u float64) float64, x0, w int) curve {
	c := curve{make([]float64, w), make([]float64, w)}
	fw := float64(ly.w)
	for i := range w {
		x := float64(x0+i) + 0.5
		c.y[i] = f(x / fw)
		slope := f((x+0.5)/fw) - f((x-0.5)/fw)
		c.norm[i] = 1 / math.Sqrt(1+slope*slope)
	}
	return c
}

// win is the layout evaluated over one window of the 10 m grid.
type win struct {
	x0, y0, w, h int

	elev, moist, mix, tex, outcrop              []float32
	lake, clearing, burn, town, village, quarry []float32 // nil when missed
	burnSev, burnIsland                         []float32 // with burn
	river, road                                 curve
	riverHW                                     []float64 // per column
	streamX                                     []float64 // per row
	streamTop, streamHW, wetWidth, roadHW       float64
}

func fillNew(f field, x0, y0, w, h int) []float32 {
	out := make([]float32, w*h)
	f.fill(out, w, x0, y0, w, h)
	return out
}

func (ly *layout) window(x0, y0, w, h int) *win {
	wn := &win{x0: x0, y0: y0, w: w, h: h}
	wn.elev = fillNew(ly.elev, x0, y0, w, h)
	wn.moist = fillNew(ly.moist, x0, y0, w, h)
	wn.mix = fillNew(ly.mix, x0, y0, w, h)
	wn.tex = fillNew(ly.tex, x0, y0, w, h)
	wn.outcrop = fillNew(ly.outcrop, x0, y0, w, h)
	wn.lake = ly.lake.dist(x0, y0, w, h)
	wn.clearing = ly.clearing.dist(x0, y0, w, h)
	wn.burn = ly.burn.dist(x0, y0, w, h)
	wn.town = ly.town.dist(x0, y0, w, h)
	wn.village = ly.village.dist(x0, y0, w, h)
	wn.quarry = ly.quarry.dist(x0, y0, w, h)
	if wn.burn != nil {
		wn.burnSev = fillNew(ly.burnSev, x0, y0, w, h)
		wn.burnIsland = fillNew(ly.burnIsland, x0, y0, w, h)
	}
	wn.river = ly.curveCols(ly.riverY, x0, w)
	wn.road = ly.curveCols(ly.roadY, x0, w)
	wn.riverHW = make([]float64, w)
	for i := range w {
		u := (float64(x0+i) + 0.5) / float64(ly.w)
		wn.riverHW[i] = math.Max(1.5, (3.5+3*u)*ly.k)
	}
	wn.streamX = make([]float64, h)
	for j := range h {
		wn.streamX[j] = ly.streamX((float64(y0+j) + 0.5) / float64(ly.h))
	}
	wn.streamTop = ly.lake.cy
	wn.streamHW = math.Max(0.8, 1.3*ly.k)
	wn.wetWidth = 45 * ly.k
	wn.roadHW = 1.0
	return wn
}

// px is the ground state of one 10 m pixel on one date: its class, the two
// endmembers it mixes with fraction m of the second, its brightness, and
// the event that changed it (0 if none).
type px struct {
	class  Class
	e1, e2 endmember
	event  uint8
	m      float32
	beta   float32
}

func clamp01(v float32) float32 { return min(max(v, 0), 1) }

// texture amplitude of the brightness per class.
var texAmp = [NumClasses]float32{Water: 0.03, Forest: 0.18, Grassland: 0.08, Cropland: 0.05,
	BareSoil: 0.08, Urban: 0.12, Wetland: 0.10, Burnt: 0.12}

// events is a set of the change events that have happened by a date.
type events uint8

const (
	onReservoir events = 1 << iota
	onClearing
	onBurn
	allEvents = onReservoir | onClearing | onBurn
)

// pixel returns the ground state of window pixel (i, j) once the events on
// have happened (none on date 0 of the pair, all on date 1).
func (ly *layout) pixel(wn *win, i, j int, on events) px {
	n := j*wn.w + i
	x, y := wn.x0+i, wn.y0+j
	mix := wn.mix[n]
	p := ly.base(wn, i, j, n, x, y)
	switch {
	case on&onReservoir != 0 && wn.lake != nil && wn.lake[n] >= lakeLevelBefore && wn.lake[n] < lakeLevelAfter:
		if p.class != Water {
			shallow := clamp01((wn.lake[n] - (lakeLevelAfter - 0.3)) / 0.3)
			p = px{class: Water, e1: emClearWater, e2: emTurbidWater, m: clamp01(0.15 + 0.15*mix + 0.3*shallow), event: EventReservoir}
		}
	case on&onClearing != 0 && p.class == Forest && wn.clearing != nil && wn.clearing[n] < 1:
		p = px{class: BareSoil, e1: emLoam, e2: emDryGrass, m: clamp01(0.35 + 0.6*mix), event: EventClearing}
	case on&onBurn != 0 && (p.class == Forest || p.class == Grassland) && wn.burn != nil && wn.burn[n] < 1 && wn.burnIsland[n] < 0.4:
		p = px{class: Burnt, e1: emChar, e2: emScorched, m: clamp01(0.35 + 0.9*wn.burnSev[n]), event: EventBurn}
	}
	p.beta = 1 + texAmp[p.class]*wn.tex[n]
	return p
}

// base is the land cover that both dates share (the reservoir at its
// before level).
func (ly *layout) base(wn *win, i, j, n, x, y int) px {
	mix := wn.mix[n]
	fx, fy := float64(x)+0.5, float64(y)+0.5
	dr := math.Abs(fy-wn.river.y[i]) * wn.river.norm[i]
	switch {
	case wn.lake != nil && wn.lake[n] < lakeLevelBefore:
		return px{class: Water, e1: emClearWater, e2: emTurbidWater, m: clamp01(0.15 + 0.15*mix)}
	case dr < wn.riverHW[i]:
		return px{class: Water, e1: emClearWater, e2: emTurbidWater, m: clamp01(0.55 + 0.4*mix)}
	case fy > wn.streamTop && fy < wn.river.y[i] && math.Abs(fx-wn.streamX[j]) < wn.streamHW:
		return px{class: Water, e1: emClearWater, e2: emTurbidWater, m: 0.7}
	case (wn.town != nil && wn.town[n] < 1) || (wn.village != nil && wn.village[n] < 1):
		return ly.urban(x, y)
	case math.Abs(fy-wn.road.y[i])*wn.road.norm[i] < wn.roadHW:
		return px{class: Urban, e1: emAsphalt, e2: emLoam, m: 0.15}
	case wn.quarry != nil && wn.quarry[n] < 1:
		return px{class: BareSoil, e1: emBrightSoil, e2: emLoam, m: clamp01(0.2 + 0.5*mix)}
	}
	e := ly.elevation(wn, n, x, y, dr)
	switch {
	case dr < wn.riverHW[i]+wn.wetWidth && wn.moist[n] > 0.12 && e < 0.40:
		return px{class: Wetland, e1: emReeds, e2: emClearWater, m: clamp01(0.3 + 0.8*mix)}
	case e < cropBelow:
		return ly.parcel(fx, fy, mix)
	case e > outcropAbove && wn.outcrop[n] > 0.4:
		return px{class: BareSoil, e1: emLoam, e2: emBrightSoil, m: clamp01(0.3 + 0.8*mix)}
	case e > forestAbove:
		return px{class: Forest, e1: emBroadleaf, e2: emConifer, m: clamp01(0.5 + 1.2*mix + 0.8*float32(e-forestAbove))}
	}
	return px{class: Grassland, e1: emGreenGrass, e2: emDryGrass, m: clamp01(0.35 + 0.9*mix)}
}

// elevation is a dimensionless terrain index: low along the river, rising
// to wooded hills in the north, with fBm relief; it is pushed up around the
// planned clearing (so that it is wooded) and towards the grass/forest
// boundary around the burn.
func (ly *layout) elevation(wn *win, n, x, y int, dr float64) float64 {
	fh := float64(ly.h)
	v := (float64(y) + 0.5) / fh
	e := 1.2*dr/fh + 0.25*(1-v) + 0.65*float64(wn.elev[n])
	if r := ly.clearing.radius(x, y); r < 2 {
		e += (0.72 - e) * 0.9 * min(1, 1.5*(1-r/2))
	}
	if r := ly.burn.radius(x, y); r < 2.4 {
		e += (0.56 - e) * min(1, 2*(1-r/2.4))
	}
	return e
}

// parcel returns the cropland state at (fx, fy): strips of fields on a grid
// rotated by about 11 degrees, each field with its own crop stage, some
// bounded by hedges.
func (ly *layout) parcel(fx, fy float64, mix float32) px {
	const cos, sin = 0.9816, 0.1908
	p := fx*cos + fy*sin
	q := -fx*sin + fy*cos
	sj := math.Floor(q / parcelRow)
	rowHash := hash2(ly.parcelKey, int64(sj), -1)
	width := 28 + 40*unit(rowHash)
	pp := p + 97*unit(mix64(rowHash))
	si := math.Floor(pp / width)
	h := hash2(ly.parcelKey, int64(si), int64(sj))
	if (pp-si*width < 1 || q-sj*parcelRow < 1) && h&1 == 0 {
		return px{class: Grassland, e1: emGreenGrass, e2: emBroadleaf, m: 0.4}
	}
	stage := unit(h)
	var m float32
	switch {
	case stage < 0.4: // green crop
		m = float32(0.03 + 0.4*stage)
	case stage < 0.65: // emerging crop
		m = float32(0.4 + 0.8*(stage-0.4))
	default: // ploughed or harvested
		m = float32(0.85 + 0.4*(stage-0.65))
	}
	return px{class: Cropland, e1: emGreenCrop, e2: emLoam, m: clamp01(m + 0.05*mix)}
}

// urban returns the town state at (x, y): a street grid of blockSize pitch
// around blocks of roofs and gardens.
func (ly *layout) urban(x, y int) px {
	if x%blockSize < 2 || y%blockSize < 2 {
		return px{class: Urban, e1: emAsphalt, e2: emRoof, m: 0.1}
	}
	h := hash2(ly.blockKey, int64(x/blockSize), int64(y/blockSize))
	return px{class: Urban, e1: emRoof, e2: emGreenGrass, m: float32(0.05 + 0.55*unit(h))}
}
