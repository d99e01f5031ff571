package scenario

import "fmt"

// SeriesDates is the number of dates of a Series.
const SeriesDates = 5

// EventCloud is the id TruthIDs of a Series gives the pixels under the
// one-date cloud: not a change of the land.
const EventCloud uint8 = 4

// The dates (0-based) on which the series' events first show.
const (
	seriesCloudDate    = 1 // date 2: a cloud, gone by date 3
	seriesClearingDate = 2 // date 3: the forest block is felled, for good
	seriesBurnDate     = 3 // date 4: the fire, whose scar lasts
)

// seriesDrift scales, per date, the pair's radiometric difference
// (afterGain, afterOffset) into that date's gain and offset: calibration
// drift and atmosphere that differ from year to year.
var seriesDrift = [SeriesDates]float64{0, 1, -0.7, 0.5, 1.3}

// cloudRefl is the invented reflectance (x 10000) of a thick cloud in the
// multispectral bands: bright and flat in the visible and near infrared,
// darker in the SWIR (ice and water absorption).
var cloudRefl = [MSBands]float64{5600, 5700, 5750, 5750, 5700, 5600, 4300, 3300}

// cloud is a one-date cloud: a warped blob whose opacity is cloudPeak in
// its core and falls to 0 at its edge, over cloudEdge of the normalised
// radius.
type cloud struct{ blob }

const (
	cloudPeak = 0.9
	cloudEdge = 0.3
)

// opacity returns the cloud's opacity for the window (stride w), or nil
// when the window misses it.
func (cl *cloud) opacity(x0, y0, w, h int) []float32 {
	d := cl.dist(x0, y0, w, h)
	for i, r := range d {
		d[i] = cloudPeak * clamp01((1-r)/cloudEdge)
	}
	return d
}

// Series is the Vessel river catchment seen once a year on SeriesDates
// dates by the multispectral sensor of the pair, each date with its own
// nodata collar, illumination, gain and offset and sensor noise. Its
// events, each with a truth known by construction (TruthIDs, Events):
//
//   - a one-date cloud on date 2 (index 1): thick in its core, thin at its
//     edge, gone on date 3; the land under it does not change;
//   - the forest clearing of the pair on date 3 (index 2), bare soil from
//     then on;
//   - the burn scar of the pair on date 4 (index 3), burnt from then on.
//
// The reservoir stays at its before level throughout. Like a Catchment, a
// Series is immutable, and every value is a pure function of (seed,
// position, band, date).
type Series struct {
	c     *Catchment
	looks [SeriesDates]look
	cloud cloud
}

// NewSeries builds the series of a width x height scene at 10 m. Both
// sides must be in [32, 2^20].
func NewSeries(width, height int, seed uint64) (*Series, error) {
	c, err := NewCatchment(width, height, seed)
	if err != nil {
		return nil, err
	}
	s := &Series{c: c}
	key := func(label uint64) uint64 { return subKey(seed, 300+label) }
	s.cloud = cloud{newBlob(key(0), width, height, 0.46, 0.36, 0.075, 0.05, -0.5, 0.35)}
	l := float64(min(width, height))
	for d := range s.looks {
		k := func(label uint64) uint64 { return key(10*uint64(d) + label) }
		tilt := func(label uint64) float64 { return 0.05 * (2*unit(k(label)) - 1) }
		lk := look{coll: newCollar(k(1), width, height, 0.006+0.001*float64(d)), noise: k(2),
			illum: illumination{f: newField(k(3), l/2, 2), gx: tilt(4), gy: tilt(5), amp: 0.02, w: width, h: height}}
		for b := range MSBands {
			lk.gain[b], lk.off[b] = 1+(afterGain[b]-1)*seriesDrift[d], afterOffset[b]*seriesDrift[d]
		}
		if d >= seriesClearingDate {
			lk.on |= onClearing
		}
		if d >= seriesBurnDate {
			lk.on |= onBurn
		}
		if d == seriesCloudDate {
			lk.cloud = &s.cloud
		}
		s.looks[d] = lk
	}
	return s, nil
}

// Catchment is the scene the series shows: its size, bands,
// georeferencing and nodata. Its own products are those of the pair, not
// of the series.
func (s *Series) Catchment() *Catchment { return s.c }

// Dates returns the invented acquisition dates, a year apart.
func (s *Series) Dates() [SeriesDates]string {
	return [SeriesDates]string{"2019-06-12", "2020-06-16", "2021-06-14", "2022-06-18", "2023-06-15"}
}

func checkSeriesDate(date int) {
	if date < 0 || date >= SeriesDates {
		panic(fmt.Sprintf("scenario: series date %d is not in [0, %d)", date, SeriesDates))
	}
}

// Multispectral renders date (0 to SeriesDates-1) for the window as
// Catchment.Multispectral does.
func (s *Series) Multispectral(date, x0, y0, w, h int, dst []float64) {
	checkSeriesDate(date)
	s.c.render(&s.looks[date], x0, y0, w, h, dst)
}

// TruthIDs renders, for the window, the event of each pixel: EventClearing
// or EventBurn where the land cover changed, EventCloud where the cloud
// covers it (opacity above 0) on its date, 0 where neither happened, and
// TruthNoData in the collar of any date and outside the scene.
func (s *Series) TruthIDs(x0, y0, w, h int, dst []uint8) {
	checkWindow(w, h, 1, len(dst))
	if w == 0 || h == 0 {
		return
	}
	wn := s.c.ly.window(x0, y0, w, h)
	out := make([]bool, w*h)
	mask := make([]bool, w*h)
	for d := range s.looks {
		s.looks[d].coll.fill(x0, y0, w, h, mask)
		for n, m := range mask {
			out[n] = out[n] || m
		}
	}
	opacity := s.cloud.opacity(x0, y0, w, h)
	last := s.looks[SeriesDates-1].on
	for j := range h {
		for i := range w {
			n := j*w + i
			switch ev := s.c.ly.pixel(wn, i, j, last).event; {
			case out[n]:
				dst[n] = TruthNoData
			case ev != 0:
				dst[n] = ev
			case opacity != nil && opacity[n] > 0:
				dst[n] = EventCloud
			default:
				dst[n] = 0
			}
		}
	}
}

// SeriesEvent is one event of a series.
type SeriesEvent struct {
	Event
	// Date is the index of the first date that shows it.
	Date int
	// Lasting is false for the cloud: the land is the same after it.
	Lasting bool
}

// Events lists the series' events with their exact areas outside the
// collars, in order of date.
func (s *Series) Events() []SeriesEvent {
	evs := []SeriesEvent{
		{Event: Event{ID: EventCloud, Name: "one-date cloud", From: "any land", To: "the same land (cloud on one date only)"}, Date: seriesCloudDate},
		{Event: Event{ID: EventClearing, Name: "forest clearing", From: "forest", To: "bare soil"}, Date: seriesClearingDate, Lasting: true},
		{Event: Event{ID: EventBurn, Name: "burn scar", From: "grassland and forest", To: "burnt"}, Date: seriesBurnDate, Lasting: true},
	}
	ly := s.c.ly
	for k, b := range []*blob{&s.cloud.blob, &ly.clearing, &ly.burn} {
		evs[k].measure(b, s.c.w, s.c.h, s.TruthIDs)
	}
	return evs
}
