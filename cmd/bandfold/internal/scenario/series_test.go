package scenario

import (
	"math"
	"testing"
)

// The expected values of these tests are known by construction: they
// follow from how the series is designed in series.go.

func newTestSeries(t testing.TB, w, h int, seed uint64) *Series {
	t.Helper()
	s, err := NewSeries(w, h, seed)
	if err != nil {
		t.Fatal(err)
	}
	return s
}

func TestSeriesWindowsMatchBigRender(t *testing.T) {
	s := newTestSeries(t, 256, 224, 11)
	for date := range SeriesDates {
		checkCut(t, "series multispectral", MSBands, func(x0, y0, w, h int, dst []float64) { s.Multispectral(date, x0, y0, w, h, dst) })
	}
	checkCut(t, "series truth", 1, s.TruthIDs)
}

// TestSeriesEvents: each event shows from its date on (the cloud on its
// date only), strongly, and unchanged land stays within its radiometric
// drift and noise on every date.
func TestSeriesEvents(t *testing.T) {
	const w, h = 256, 256
	s := newTestSeries(t, w, h, 6)
	ms := make([][]float64, SeriesDates)
	for d := range ms {
		ms[d] = make([]float64, w*h*MSBands)
		s.Multispectral(d, 0, 0, w, h, ms[d])
	}
	ids := make([]uint8, w*h)
	s.TruthIDs(0, 0, w, h, ids)
	count := map[uint8]int{}
	for _, v := range ids {
		count[v]++
	}
	evs := s.Events()
	if len(evs) != 3 {
		t.Fatalf("%d events, want the cloud, the clearing and the burn", len(evs))
	}
	wantDates := map[uint8]int{EventCloud: 1, EventClearing: 2, EventBurn: 3}
	for _, ev := range evs {
		if ev.Date != wantDates[ev.ID] || ev.Lasting != (ev.ID != EventCloud) {
			t.Errorf("%s: date %d lasting %v", ev.Name, ev.Date, ev.Lasting)
		}
		if ev.Area != count[ev.ID] || float64(ev.Area) < 0.004*w*h {
			t.Errorf("%s: Events says %d pixels, the truth has %d (want at least 0.4%% of the scene)", ev.Name, ev.Area, count[ev.ID])
		}
		for _, other := range evs {
			if other.ID != ev.ID && ev.Bounds.Overlaps(other.Bounds) {
				t.Errorf("%s and %s overlap: %v, %v", ev.Name, other.Name, ev.Bounds, other.Bounds)
			}
		}
	}
	// moved is the change of pixel n from date a to date b in units of the
	// noise sigma (root mean square over the bands).
	moved := func(n, a, b int) float64 {
		sum := 0.0
		for k := range MSBands {
			d := (ms[b][n*MSBands+k] - ms[a][n*MSBands+k]) / msBands[k].sigma
			sum += d * d
		}
		return math.Sqrt(sum / MSBands)
	}
	type key struct {
		id   uint8
		a, b int
	}
	mean := map[key]float64{}
	for n, id := range ids {
		if id == TruthNoData {
			continue
		}
		for a := range SeriesDates {
			for b := a + 1; b < SeriesDates; b++ {
				mean[key{id, a, b}] += moved(n, a, b) / float64(count[id])
			}
		}
	}
	// changedBetween is whether an event makes dates a and b differ.
	changedBetween := func(id uint8, a, b int) bool {
		d := wantDates[id]
		if id == EventCloud {
			return (a == d) != (b == d)
		}
		return a < d && b >= d
	}
	for k, m := range mean {
		switch {
		case k.id == 0 && m > 4:
			t.Errorf("unchanged land moves %.1f sigma on average from date %d to %d", m, k.a+1, k.b+1)
		case k.id != 0 && changedBetween(k.id, k.a, k.b) && m < 15:
			t.Errorf("event %d moves only %.1f sigma from date %d to %d", k.id, m, k.a+1, k.b+1)
		case k.id != 0 && !changedBetween(k.id, k.a, k.b) && m > 4:
			t.Errorf("event %d moves %.1f sigma from date %d to %d, when it should not show", k.id, m, k.a+1, k.b+1)
		}
	}
}

// TestSeriesSharesThePair: the series shows the catchment of the pair
// (same seed): outside its events and collars, its first date's ground is
// the pair's before date's, so the layout is shared.
func TestSeriesSharesThePair(t *testing.T) {
	s := newTestSeries(t, 128, 128, 3)
	c := newTestCatchment(t, 128, 128, 3)
	if s.Catchment().GeoTransform() != c.GeoTransform() || len(s.Catchment().BandNames()) != MSBands {
		t.Fatal("the series' scene differs from the pair's")
	}
	wn := s.c.ly.window(0, 0, 128, 128)
	wc := c.ly.window(0, 0, 128, 128)
	for j := range 128 {
		for i := range 128 {
			if s.c.ly.pixel(wn, i, j, 0) != c.ly.pixel(wc, i, j, 0) {
				t.Fatalf("pixel (%d, %d) differs", i, j)
			}
		}
	}
	if _, err := NewSeries(16, 16, 1); err == nil {
		t.Error("a 16 x 16 series was accepted")
	}
}
