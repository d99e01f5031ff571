package demo_test

import (
	"fmt"
	"math"
	"path/filepath"
	"slices"
	"testing"

	"bandfold/cmd/bandfold/internal/demo"
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/jobtest"
	"bandfold/cmd/bandfold/internal/scenario"
	"bandfold/cmd/bandfold/internal/series"
	"bandfold/cmd/bandfold/internal/timeline"
	"bandfold/raster"
	"bandfold/tiles"
	"bandfold/transform/change"
)

// TestTimelineSeriesAccuracy runs the timeline with the command's defaults
// (--normalize stable, --confirm lasting, the default threshold, --min-area
// 4px) on the scenario's five-date series and checks it against the
// series' truth, which is known by construction (scenario.Series: a
// one-date cloud on date 2, a clearing from date 3, a burn from date 4,
// sensor noise and radiometric drift on every date):
//   - the date of first confirmed change is the event's date for at least
//     95% of the clearing's and the burn's pixels;
//   - at most 1% of the cloud's pixels have a confirmed change at any step;
//   - at most 1% of the unchanged pixels have a confirmed change anywhere.
func TestTimelineSeriesAccuracy(t *testing.T) {
	dir := t.TempDir()
	s, files, err := demo.WriteSeries(t.Context(), jobtest.TestEnv, demo.SeriesWrite{Dir: dir, Size: 256, Seed: 7})
	if err != nil {
		t.Fatal(err)
	}
	thr, err := change.ParseThreshold(change.DefaultThreshold)
	if err != nil {
		t.Fatal(err)
	}
	out := filepath.Join(dir, "tl")
	// The dates given out of order: the timeline sorts them by the
	// ACQUISITION_DATE each carries.
	scenes := []string{files.Dates[3], files.Dates[0], files.Dates[4], files.Dates[2], files.Dates[1]}
	res, err := timeline.Timeline(t.Context(), jobtest.WorkersEnv(3), timeline.TimelineOptions{Scenes: scenes, SharedOptions: series.SharedOptions{Out: out, Threshold: thr, MinArea: jobkit.MinArea{Px: 4}}})
	if err != nil {
		t.Fatal(err)
	}
	dates := s.Dates()
	for i, sc := range res.Scenes {
		if sc.Date != dates[i] || sc.DateSource != "ACQUISITION_DATE" || res.Paths.Resolve(sc.Path) != files.Dates[i] {
			t.Errorf("scene %d: %s dated %s from %s, want %s dated %s from ACQUISITION_DATE", i+1, sc.Path, sc.Date, sc.DateSource, files.Dates[i], dates[i])
		}
	}
	if res.Normalize != series.NormalizeStable || res.Confirm != timeline.ConfirmLasting {
		t.Errorf("normalize %q confirm %q, want the defaults", res.Normalize, res.Confirm)
	}
	_, first, valid := jobtest.ReadImage(t, filepath.Join(out, "first-change.tif"), tiles.Tile{})
	ids := make([]uint8, 256*256)
	s.TruthIDs(0, 0, 256, 256, ids)
	type tally struct{ pixels, correct, confirmed int }
	got := map[uint8]*tally{}
	for _, id := range []uint8{0, scenario.EventClearing, scenario.EventBurn, scenario.EventCloud} {
		got[id] = &tally{}
	}
	want := map[uint8]float64{scenario.EventClearing: float64(demo.Yyyymmdd(dates[2])), scenario.EventBurn: float64(demo.Yyyymmdd(dates[3]))}
	for i, id := range ids {
		c, ok := got[id]
		if !ok {
			continue // nodata in some date's collar
		}
		c.pixels++
		if valid[i] {
			c.confirmed++
			if first[i] == want[id] {
				c.correct++
			}
		}
	}
	for _, ev := range s.Events() {
		c := got[ev.ID]
		if c.pixels < 200 {
			t.Fatalf("%s: %d pixels, the series should have hundreds", ev.Name, c.pixels)
		}
		if !ev.Lasting {
			if share := float64(c.confirmed) / float64(c.pixels); share > 0.01 {
				t.Errorf("%s: %.2f%% of its %d pixels confirmed as change, want at most 1%%", ev.Name, 100*share, c.pixels)
			}
			continue
		}
		if share := float64(c.correct) / float64(c.pixels); share < 0.95 {
			t.Errorf("%s: first change on %s for %.2f%% of its %d pixels, want at least 95%%", ev.Name, dates[ev.Date], 100*share, c.pixels)
		}
	}
	if share := float64(got[0].confirmed) / float64(got[0].pixels); share > 0.01 {
		t.Errorf("%.2f%% of %d unchanged pixels confirmed as change, want at most 1%%", 100*share, got[0].pixels)
	}
	for id, c := range got {
		t.Logf("event %d: %d pixels, %d confirmed, %d with the right first date", id, c.pixels, c.confirmed, c.correct)
	}
	for _, st := range res.Steps {
		t.Logf("step %d %s to %s: flagged %d confirmed %d", st.Step, st.From, st.To, st.FlaggedPixels, st.LastingPixels)
	}
	// The demo's own scoring of the same run agrees with the counts above.
	d := &demo.DemoTimeline{}
	if err := d.Score(s, filepath.Join(out, "first-change.tif")); err != nil {
		t.Fatal(err)
	}
	for k, ev := range s.Events() {
		c, e := got[ev.ID], d.Events[k]
		want := float64(c.correct) / float64(c.pixels)
		if !ev.Lasting {
			want = 1 - float64(c.confirmed)/float64(c.pixels)
		}
		if e.Pixels != int64(c.pixels) || e.Correct != want || e.Date != dates[ev.Date] {
			t.Errorf("demo score of %s: %d pixels, %v correct, date %s; the test counts %d, %v, %s", ev.Name, e.Pixels, e.Correct, e.Date, c.pixels, want, dates[ev.Date])
		}
		if wantFound := map[bool]string{true: dates[ev.Date], false: "none"}[ev.Lasting]; e.Found != wantFound {
			t.Errorf("demo score of %s: found %s, want %s", ev.Name, e.Found, wantFound)
		}
	}
	if d.Unchanged != int64(got[0].pixels) || d.UnchangedLasting != int64(got[0].confirmed) {
		t.Errorf("demo score: %d of %d unchanged confirmed; the test counts %d of %d", d.UnchangedLasting, d.Unchanged, got[0].confirmed, got[0].pixels)
	}
	md, err := raster.ReadMetadata(files.Truth)
	if err != nil || md["EVENT_4"] == "" {
		t.Errorf("the truth's metadata %v lacks the cloud's date (%v)", md, err)
	}
}

// TestTimelineWorkers: the outputs are identical for any number of
// workers (the tiles are delivered in order, and the shared sample is the
// same whichever bound each worker read), here with a sample small enough
// for the sample's hint to cut (known by construction: 4 x 1000 of 128 x 128
// pixels).
func TestTimelineWorkers(t *testing.T) {
	dir := t.TempDir()
	_, files, err := demo.WriteSeries(t.Context(), jobtest.TestEnv, demo.SeriesWrite{Dir: dir, Size: 128, Seed: 3})
	if err != nil {
		t.Fatal(err)
	}
	if change.SampleHint(1000, 128*128) == math.MaxUint64 {
		t.Fatal("the hint would not cut")
	}
	var first map[string][]float64
	for _, workers := range []int{1, 2, 5} {
		out := filepath.Join(dir, fmt.Sprint("tl", workers))
		if _, err := timeline.Timeline(t.Context(), jobtest.WorkersEnv(workers), timeline.TimelineOptions{Scenes: files.Dates, SharedOptions: series.SharedOptions{Out: out, Sample: 1000, MinArea: jobkit.MinArea{Px: 4}, Input: jobkit.Input{Tile: 32}}}); err != nil {
			t.Fatal(err)
		}
		got := map[string][]float64{}
		for _, name := range []string{"steps.tif", "max-magnitude.tif", "first-change.tif", "last-change.tif", "change-count.tif"} {
			_, v, _ := jobtest.ReadImage(t, filepath.Join(out, name), tiles.Tile{})
			got[name] = v
		}
		if first == nil {
			first = got
			continue
		}
		for name, v := range got {
			if !slices.EqualFunc(v, first[name], func(a, b float64) bool { return a == b || (a != a && b != b) }) {
				t.Errorf("%s differs between 1 and %d workers", name, workers)
			}
		}
	}
}
