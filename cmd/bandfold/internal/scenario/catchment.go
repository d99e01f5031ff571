package scenario

import (
	"fmt"
	"image"
	"math"
)

// Band counts and nodata values of the catchment products.
const (
	MSBands      = 8     // bands of the multispectral pair
	HyperBands   = 120   // bands of the hyperspectral cube
	MSNoData     = 0     // multispectral nodata (UInt16)
	HyperNoData  = -9999 // hyperspectral nodata (Int16)
	TruthNoData  = 255   // Truth, TruthIDs and ClassMap value in a collar
	PixelSize    = 10.0  // multispectral pixel size, m
	HyperFactor  = 3     // hyperspectral pixel = HyperFactor x HyperFactor multispectral pixels
	Name         = "Vessel river catchment"
	minSceneSide = 32
	maxSceneSide = 1 << 20
)

// Catchment is the invented Vessel river catchment: a multispectral pair
// at 10 m, its change truth, and a hyperspectral cube at 30 m, all rendered
// window by window as pure functions of (seed, position, band, date).
// The layout is laid out relative to the scene size, so any size shows the
// whole catchment; textures (fields, town blocks, noise) keep their pixel
// scale.
//
// A Catchment is immutable; its methods may be called concurrently.
type Catchment struct {
	w, h  int
	seed  uint64
	ly    *layout
	spec  *spectra
	looks [2]look // date 0 (before) and date 1 (after)

	hyColl  collar
	hyIllum illumination
	hyNoise uint64
}

// NewCatchment builds the scene tables for a width x height scene at 10 m.
// Both sides must be in [32, 2^20].
func NewCatchment(width, height int, seed uint64) (*Catchment, error) {
	if width < minSceneSide || height < minSceneSide || width > maxSceneSide || height > maxSceneSide {
		return nil, fmt.Errorf("scenario: scene size %dx%d outside [%d, %d]", width, height, minSceneSide, maxSceneSide)
	}
	c := &Catchment{w: width, h: height, seed: seed, ly: newLayout(width, height, seed), spec: newSpectra()}
	key := func(label uint64) uint64 { return subKey(seed, 100+label) }
	l := float64(min(width, height))
	c.looks[0] = look{coll: newCollar(key(1), width, height, 0.006), noise: key(5),
		illum: illumination{f: newField(key(3), l/2, 2), gx: 0.05, gy: -0.03, amp: 0.02, w: width, h: height}}
	c.looks[1] = look{coll: newCollar(key(2), width, height, 0.010), noise: key(6), on: allEvents,
		illum: illumination{f: newField(key(4), l/2, 2), gx: -0.04, gy: 0.045, amp: 0.02, w: width, h: height}}
	for b := range MSBands {
		c.looks[0].gain[b] = 1
		c.looks[1].gain[b], c.looks[1].off[b] = afterGain[b], afterOffset[b]
	}
	hw, hh := c.HyperSize()
	c.hyColl = newCollar(key(7), hw, hh, 0.006)
	c.hyIllum = illumination{f: newField(key(8), float64(min(hw, hh))/2, 2), gx: 0.03, gy: 0.02, amp: 0.015, w: hw, h: hh}
	c.hyNoise = key(9)
	return c, nil
}

// illumination is a smooth multiplicative field: a linear gradient plus a
// little low-frequency fBm (sun angle, haze).
type illumination struct {
	f           field
	gx, gy, amp float64
	w, h        int
}

func (il *illumination) fill(x0, y0, w, h int) []float32 {
	out := fillNew(il.f, x0, y0, w, h)
	for j := range h {
		v := (float64(y0+j)+0.5)/float64(il.h) - 0.5
		for i := range w {
			u := (float64(x0+i)+0.5)/float64(il.w) - 0.5
			out[j*w+i] = float32(1 + il.gx*u + il.gy*v + il.amp*float64(out[j*w+i]))
		}
	}
	return out
}

// Size returns the multispectral scene size in pixels.
func (c *Catchment) Size() (width, height int) { return c.w, c.h }

// Seed returns the scene seed.
func (c *Catchment) Seed() uint64 { return c.seed }

// Dates returns the invented acquisition dates of date 0 and date 1.
func (c *Catchment) Dates() [2]string { return [2]string{"2023-06-14", "2024-06-19"} }

// BandNames returns the names of the 8 multispectral bands with their
// invented centre wavelengths.
func (c *Catchment) BandNames() []string {
	out := make([]string, MSBands)
	for b := range out {
		out[b] = msBandName(b)
	}
	return out
}

// BandWavelengths returns the multispectral band centres in nm.
func (c *Catchment) BandWavelengths() []float64 {
	out := make([]float64, MSBands)
	for b := range out {
		out[b] = msBands[b].nm
	}
	return out
}

// NoData is the multispectral nodata value (0).
func (c *Catchment) NoData() float64 { return MSNoData }

func checkWindow(w, h, bands, n int) {
	if w < 0 || h < 0 || n < w*h*bands {
		panic(fmt.Sprintf("scenario: window %dx%d x %d bands needs %d values, got %d", w, h, bands, w*h*bands, n))
	}
}

func checkDate(date int) {
	if date != 0 && date != 1 {
		panic(fmt.Sprintf("scenario: date %d is not 0 or 1", date))
	}
}

// Multispectral renders date 0 (before) or 1 (after) for the window
// (x0, y0, w, h) of the 10 m grid into dst, pixel-major:
// dst[(row*w+col)*MSBands+b]. Values are surface reflectance x 10000,
// integral in [1, 65535], or MSNoData (all bands) in the date's collar and
// outside the scene.
func (c *Catchment) Multispectral(date, x0, y0, w, h int, dst []float64) {
	checkDate(date)
	c.render(&c.looks[date], x0, y0, w, h, dst)
}

// look is how one date sees the catchment: its nodata collar, its
// illumination, its sensor-noise stream, its per-band gain and offset, the
// events that have happened by then, and a cloud (nil for a clear sky).
type look struct {
	coll      collar
	illum     illumination
	noise     uint64
	gain, off [MSBands]float64
	on        events
	cloud     *cloud
}

// render renders the multispectral window of one look (see Multispectral).
func (c *Catchment) render(lk *look, x0, y0, w, h int, dst []float64) {
	checkWindow(w, h, MSBands, len(dst))
	if w == 0 || h == 0 {
		return
	}
	wn := c.ly.window(x0, y0, w, h)
	mask := make([]bool, w*h)
	lk.coll.fill(x0, y0, w, h, mask)
	illum := lk.illum.fill(x0, y0, w, h)
	var opacity []float32
	if lk.cloud != nil {
		opacity = lk.cloud.opacity(x0, y0, w, h)
	}
	gain, off := &lk.gain, &lk.off
	const rho = 0.2 // share of the noise variance common to all bands
	own, common := math.Sqrt(1-rho), math.Sqrt(rho)
	for j := range h {
		for i := range w {
			n := j*w + i
			out := dst[n*MSBands : (n+1)*MSBands]
			if mask[n] {
				clear(out)
				continue
			}
			p := c.ly.pixel(wn, i, j, lk.on)
			s1, s2 := &c.spec.ms[p.e1], &c.spec.ms[p.e2]
			scale := float64(illum[n] * p.beta)
			ph := pixelHash(lk.noise, x0+i, y0+j)
			shared := common * gauss(ph)
			a := 0.0
			if opacity != nil {
				a = float64(opacity[n])
			}
			for b := range out {
				refl := float64(s1[b] + (s2[b]-s1[b])*p.m)
				v := gain[b] * scale * refl
				if a > 0 {
					// What the sensor sees through the cloud: the ground
					// attenuated, plus the cloud's own reflectance.
					v = gain[b] * ((1-a)*scale*refl + a*cloudRefl[b])
				}
				// Summed in this order, the pair's values are those it always had.
				v = v + off[b] + msBands[b].sigma*(own*gauss(bandHash(ph, b))+shared)
				out[b] = min(max(math.Round(v), 1), 65535)
			}
		}
	}
}

// ClassMap renders the land-cover class (a Class) of date 0 or 1 for the
// window into dst (w*h), TruthNoData in the date's collar and outside.
func (c *Catchment) ClassMap(date, x0, y0, w, h int, dst []uint8) {
	checkDate(date)
	checkWindow(w, h, 1, len(dst))
	if w == 0 || h == 0 {
		return
	}
	wn := c.ly.window(x0, y0, w, h)
	mask := make([]bool, w*h)
	c.looks[date].coll.fill(x0, y0, w, h, mask)
	for j := range h {
		for i := range w {
			n := j*w + i
			if mask[n] {
				dst[n] = TruthNoData
			} else {
				dst[n] = uint8(c.ly.pixel(wn, i, j, c.looks[date].on).class)
			}
		}
	}
}

// TruthIDs renders, for the window, the id of the event that changed each
// pixel's land cover between the dates (EventClearing, EventReservoir,
// EventBurn), 0 where the land cover is the same on both dates, and
// TruthNoData in the collar of either date and outside the scene.
func (c *Catchment) TruthIDs(x0, y0, w, h int, dst []uint8) {
	checkWindow(w, h, 1, len(dst))
	if w == 0 || h == 0 {
		return
	}
	wn := c.ly.window(x0, y0, w, h)
	m0 := make([]bool, w*h)
	m1 := make([]bool, w*h)
	c.looks[0].coll.fill(x0, y0, w, h, m0)
	c.looks[1].coll.fill(x0, y0, w, h, m1)
	for j := range h {
		for i := range w {
			n := j*w + i
			if m0[n] || m1[n] {
				dst[n] = TruthNoData
				continue
			}
			// Only date 1 carries events; its state names the event
			// whenever the class differs from date 0.
			dst[n] = c.ly.pixel(wn, i, j, allEvents).event
		}
	}
}

// Truth renders the binary change truth: 1 where an event changed the land
// cover, 0 where it is unchanged, TruthNoData in either collar.
func (c *Catchment) Truth(x0, y0, w, h int, dst []uint8) {
	c.TruthIDs(x0, y0, w, h, dst)
	for n, v := range dst[:w*h] {
		if v != 0 && v != TruthNoData {
			dst[n] = 1
		}
	}
}

// Event is one known change between the dates.
type Event struct {
	ID       uint8  // value in TruthIDs
	Name     string // short name
	From, To string // land cover before and after
	Area     int    // changed pixels outside the collars (exact count)
	// Bounds are the tight bounds of the changed pixels on the 10 m grid.
	Bounds image.Rectangle
}

// Events lists the change events with their exact areas. It renders the
// truth over each event's extent, so it costs a few tens of milliseconds at
// 2048 x 2048.
func (c *Catchment) Events() []Event {
	evs := []Event{
		{ID: EventClearing, Name: "forest clearing", From: "forest", To: "bare soil"},
		{ID: EventReservoir, Name: "reservoir rise", From: "grassland, forest, cropland and other land", To: "water"},
		{ID: EventBurn, Name: "burn scar", From: "grassland and forest", To: "burnt"},
	}
	for k, b := range []*blob{&c.ly.clearing, &c.ly.lake, &c.ly.burn} {
		evs[k].measure(b, c.w, c.h, c.TruthIDs)
	}
	return evs
}

// measure sets the event's area and bounds from the truth rendered over
// the blob it lies in.
func (ev *Event) measure(b *blob, w, h int, truth func(x0, y0, w, h int, dst []uint8)) {
	r := b.bounds.Intersect(image.Rect(0, 0, w, h))
	ids := make([]uint8, r.Dx()*r.Dy())
	truth(r.Min.X, r.Min.Y, r.Dx(), r.Dy(), ids)
	for n, v := range ids {
		if v != ev.ID {
			continue
		}
		pt := image.Pt(r.Min.X+n%r.Dx(), r.Min.Y+n/r.Dx())
		ev.Bounds = ev.Bounds.Union(image.Rectangle{pt, pt.Add(image.Pt(1, 1))})
		ev.Area++
	}
}

// Georeferencing: an invented place. The grid lies on a custom transverse
// Mercator projection centred on open ocean in the South Pacific (40° S,
// 120° W, some 1,500 km from the nearest land), so that no mapped polygon of
// the invented scenario can land on a real field or town.
const (
	// PROJ is the scenario's CRS as a PROJ string.
	PROJ    = "+proj=tmerc +lat_0=-40 +lon_0=-120 +k=1 +x_0=100000 +y_0=100000 +datum=WGS84 +units=m +no_defs"
	originX = 80000.0
	originY = 120000.0
	// Location declares the place in the dataset metadata.
	Location = "invented scenario on a custom transverse Mercator projection centred on open ocean (40 S, 120 W, South Pacific): no real place"
)

// CRS returns the scenario's coordinate reference system as a PROJ string.
func (c *Catchment) CRS() string { return PROJ }

// GeoTransform returns the GDAL-style geotransform of the 10 m grid
// (north-up, origin at the top-left corner).
func (c *Catchment) GeoTransform() [6]float64 {
	return [6]float64{originX, PixelSize, 0, originY, 0, -PixelSize}
}

// HyperGeoTransform returns the geotransform of the 30 m hyperspectral
// grid, sharing the top-left corner of the 10 m grid.
func (c *Catchment) HyperGeoTransform() [6]float64 {
	s := PixelSize * HyperFactor
	return [6]float64{originX, s, 0, originY, 0, -s}
}
