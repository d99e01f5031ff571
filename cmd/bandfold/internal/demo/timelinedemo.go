package demo

import (
	"context"
	"fmt"
	"os"
	"path/filepath"
	"strings"

	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/scenario"
	"bandfold/cmd/bandfold/internal/series"
	"bandfold/cmd/bandfold/internal/timeline"
	"bandfold/raster"
	"bandfold/tiles"
	"bandfold/transform/change"
)

// SeriesFiles names the files of the scenario's series: one stack per date
// and the truth.
type SeriesFiles struct {
	Dates []string
	Truth string
}

// seriesFiles are the series' files in dir: the dates in their own folder,
// so that a glob of it is the series, and the truth beside it.
func seriesFiles(dir string, s *scenario.Series) SeriesFiles {
	var f SeriesFiles
	for _, d := range s.Dates() {
		f.Dates = append(f.Dates, filepath.Join(dir, "scenario", "series", "vessel-"+d+".tif"))
	}
	f.Truth = filepath.Join(dir, "scenario", "vessel-series-truth.tif")
	return f
}

// SeriesWrite is what WriteSeries writes: the series of side Size into Dir.
type SeriesWrite struct {
	Dir       string
	Size      int
	Seed      uint64
	Overwrite bool
}

// WriteSeries renders the scenario's five-date series tile by tile: each
// date a stack dated by its TIFFTAG_DATETIME (and its file name), and the
// truth, each pixel's event id (scenario.Series.TruthIDs) with the events'
// dates in its metadata.
func WriteSeries(ctx context.Context, env jobkit.Env, o SeriesWrite) (*scenario.Series, SeriesFiles, error) {
	s, err := scenario.NewSeries(o.Size, o.Size, o.Seed)
	if err != nil {
		return nil, SeriesFiles{}, jobkit.Usagef("series size %d: %v", o.Size, strings.TrimPrefix(err.Error(), "scenario: "))
	}
	files := seriesFiles(o.Dir, s)
	if err := os.MkdirAll(filepath.Dir(files.Dates[0]), 0o755); err != nil {
		return nil, files, fmt.Errorf("demo folder %s: %w", o.Dir, jobkit.UnwrapPath(err))
	}
	c := s.Catchment()
	wkt, err := raster.FromPROJ(c.CRS())
	if err != nil {
		return nil, files, err
	}
	w, h := c.Size()
	g := raster.Grid{Width: w, Height: h, GeoTransform: c.GeoTransform(), HasGeoTransform: true, Projection: wkt}
	tag := func(extra ...string) map[string]string {
		md := map[string]string{"SCENARIO": scenario.Name + " (invented demo data, five-date series)", "SCENARIO_LOCATION": scenario.Location}
		for i := 0; i+1 < len(extra); i += 2 {
			md[extra[i]] = extra[i+1]
		}
		return md
	}
	grid := tiles.NewGrid(w, h, 256, 256)
	nd := c.NoData()
	dates := s.Dates()
	for date, path := range files.Dates {
		spec := raster.Spec{Grid: g, Bands: scenario.MSBands, DataType: "UInt16", NoData: &nd, Descriptions: c.BandNames(), Overwrite: o.Overwrite,
			Metadata: tag("ACQUISITION_DATE", dates[date])}
		err := jobkit.WriteRaster(ctx, env, path, spec, grid, func(int) jobkit.RenderFunc {
			return func(t tiles.Tile, dst []float64) error {
				s.Multispectral(date, t.X, t.Y, t.W, t.H, dst)
				return nil
			}
		})
		if err != nil {
			return nil, files, err
		}
	}
	var md []string
	for _, ev := range s.Events() {
		when := "from " + dates[ev.Date] + " on"
		if !ev.Lasting {
			when = "on " + dates[ev.Date] + " only"
		}
		md = append(md, fmt.Sprintf("EVENT_%d", ev.ID), fmt.Sprintf("%s (%s -> %s), %s", ev.Name, ev.From, ev.To, when))
	}
	tnd := float64(scenario.TruthNoData)
	spec := raster.Spec{Grid: g, Bands: 1, DataType: "Byte", NoData: &tnd, Overwrite: o.Overwrite, Metadata: tag(md...),
		Descriptions: []string{"series truth: the event of each pixel (see EVENT_n), 0 unchanged"}}
	err = jobkit.WriteRaster(ctx, env, files.Truth, spec, grid, truthRender(s.TruthIDs))
	return s, files, err
}

// truthRender renders a scenario's truth (a window of bytes) for
// WriteRaster.
func truthRender(truth func(x0, y0, w, h int, dst []uint8)) func(int) jobkit.RenderFunc {
	return func(int) jobkit.RenderFunc {
		var ids []uint8
		return func(t tiles.Tile, dst []float64) error {
			ids = jobkit.Grow(ids, t.Pixels())
			truth(t.X, t.Y, t.W, t.H, ids)
			for i, v := range ids {
				dst[i] = float64(v)
			}
			return nil
		}
	}
}

// DemoTimeline is the demo's five-date series: the timeline run on it and,
// for each event of the scenario, its true date and the date found.
type DemoTimeline struct {
	Size     int
	Files    SeriesFiles
	Timeline *timeline.TimelineResult
	Events   []DemoEvent
	// Unchanged are the pixels no event touched; UnchangedLasting those
	// of them with a lasting change on some step.
	Unchanged, UnchangedLasting int64
}

// DemoEvent is one event of the series as the timeline found it.
type DemoEvent struct {
	Name string
	// Date is its true date; Lasting is false for the cloud, which should
	// be found as no lasting change.
	Date    string
	Lasting bool
	Pixels  int64
	// Found is the most common date of first lasting change over its
	// pixels, "none" when most have none.
	Found string
	// Correct is the share of its pixels whose first lasting change is
	// its date (for the cloud: that have none).
	Correct float64
}

// demoTimeline writes the series beside the pair and maps it with the
// command's defaults, scoring each event against the truth.
func demoTimeline(ctx context.Context, env jobkit.Env, o *DemoOptions) (*DemoTimeline, error) {
	size := max(o.Size/2, 64)
	s, files, err := WriteSeries(ctx, env, SeriesWrite{Dir: o.Dir, Size: size, Seed: o.Seed, Overwrite: o.Overwrite})
	if err != nil {
		return nil, err
	}
	thr, err := change.ParseThreshold(change.DefaultThreshold)
	if err != nil {
		return nil, err
	}
	out := filepath.Join(o.Dir, "timeline")
	res, err := timeline.Timeline(ctx, env, timeline.TimelineOptions{Scenes: files.Dates,
		Confirm: timeline.ConfirmLasting, SharedOptions: series.SharedOptions{Out: out, Threshold: thr, MinArea: jobkit.MinArea{Px: 4},
			Normalize: series.NormalizeStable, Overwrite: o.Overwrite}})
	if err != nil {
		return nil, fmt.Errorf("demo timeline: %w", err)
	}
	d := &DemoTimeline{Size: size, Files: files, Timeline: res}
	if err := d.Score(s, filepath.Join(out, "first-change.tif")); err != nil {
		return nil, err
	}
	return d, nil
}

// Score counts, tile by tile, each event's pixels by their date of first
// lasting change (first-change.tif) against the truth.
func (d *DemoTimeline) Score(s *scenario.Series, firstChange string) error {
	st, err := raster.Open([]string{firstChange})
	if err != nil {
		return err
	}
	defer st.Close()
	rd, err := st.NewReader()
	if err != nil {
		return err
	}
	defer rd.Close()
	evs := s.Events()
	found := make([]map[int]int64, len(evs)) // first-change date (0: none) -> pixels
	for k := range found {
		found[k] = map[int]int64{}
	}
	var first []float64
	var valid []bool
	var ids []uint8
	for t := range jobkit.GridFor(st, 0).Tiles() {
		n := t.Pixels()
		first, valid, ids = jobkit.Grow(first, n), jobkit.Grow(valid, n), jobkit.Grow(ids, n)
		if _, err := rd.Read(t, first, valid); err != nil {
			return err
		}
		s.TruthIDs(t.X, t.Y, t.W, t.H, ids)
		for i, id := range ids {
			date := 0
			if valid[i] {
				date = int(first[i])
			}
			if id == 0 {
				d.Unchanged++
				if date != 0 {
					d.UnchangedLasting++
				}
			}
			for k, ev := range evs {
				if ev.ID == id {
					found[k][date]++
				}
			}
		}
	}
	dates := s.Dates()
	for k, ev := range evs {
		e := DemoEvent{Name: ev.Name, Date: dates[ev.Date], Lasting: ev.Lasting, Found: "none"}
		want := 0
		if ev.Lasting {
			want = Yyyymmdd(dates[ev.Date])
		}
		best, bestN := 0, int64(-1)
		for date, n := range found[k] {
			e.Pixels += n
			if n > bestN || (n == bestN && date < best) {
				best, bestN = date, n
			}
		}
		if best > 0 {
			e.Found = fmt.Sprintf("%04d-%02d-%02d", best/10000, best/100%100, best%100)
		}
		if e.Pixels > 0 {
			e.Correct = float64(found[k][want]) / float64(e.Pixels)
		}
		d.Events = append(d.Events, e)
	}
	return nil
}

// Yyyymmdd turns a YYYY-MM-DD date into the integer first-change.tif
// stores.
func Yyyymmdd(date string) int {
	d, _ := raster.ParseDate(date)
	return d.YYYYMMDD()
}
