package jobtest

import (
	"math/rand/v2"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/learn"
	"bandfold/cmd/bandfold/internal/pairchange"
	"bandfold/cmd/bandfold/internal/series"
	"bandfold/cmd/bandfold/internal/timeline"
	"bandfold/raster"
	"bandfold/tiles"
	"bandfold/transform/change"
)

// thirdDate writes a third date of the scenario: BEFORE again with a little
// noise (sd 20 in reflectance x 10000) and, as the file name says, dated
// 2025-06-20; nothing else in it dates it.
func thirdDate(t *testing.T, before, dir string) string {
	t.Helper()
	s, buf, valid := ReadImage(t, before, tiles.Tile{})
	rng := rand.New(rand.NewPCG(7, 7))
	p := s.Len()
	for i := range buf {
		if valid[i/p] {
			buf[i] += 20 * rng.NormFloat64()
		}
	}
	nd := 0.0
	path := filepath.Join(dir, "vessel-2025-06-20.tif")
	WriteRasterFile(t, path, raster.Spec{Grid: s.Grid, Bands: p, DataType: "Float32", NoData: &nd}, buf)
	return path
}

// TestTimelineStepsEqualChange: with --normalize none --confirm none and one
// --basis, each step's flagged pixels must equal those of change on that
// pair with the same basis and settings, pixel for pixel (exact: the same
// sampler, model, threshold and sieve compute both, pairfit.go).
func TestTimelineStepsEqualChange(t *testing.T) {
	dir := t.TempDir()
	f := ScenarioFiles(t, dir, 128, 5)
	third := thirdDate(t, f.Before, dir)
	basis := filepath.Join(dir, "pair.basis.json")
	Learn(t, TestEnv, learn.LearnOptions{Scenes: []string{f.Before, f.After}, Variance: 0.99, Out: basis})
	thr, err := change.ParseThreshold(change.DefaultThreshold)
	if err != nil {
		t.Fatal(err)
	}
	out := filepath.Join(dir, "tl")
	// The scenes out of order: the timeline sorts them by date.
	res, err := timeline.Timeline(t.Context(), WorkersEnv(3), timeline.TimelineOptions{Scenes: []string{third, f.After, f.Before},
		Confirm: timeline.ConfirmNone, SharedOptions: series.SharedOptions{Out: out, Basis: basis,
			Threshold: thr, MinArea: jobkit.MinArea{Px: 4}, Normalize: series.NormalizeNone}})
	if err != nil {
		t.Fatal(err)
	}
	if got := []string{res.Scenes[0].Date, res.Scenes[1].Date, res.Scenes[2].Date}; strings.Join(got, " ") != "2023-06-14 2024-06-19 2025-06-20" {
		t.Fatalf("dates %v", got)
	}
	if res.Scenes[0].DateSource != "ACQUISITION_DATE" || res.Scenes[2].DateSource != "file name" {
		t.Errorf("date sources %q, %q", res.Scenes[0].DateSource, res.Scenes[2].DateSource)
	}
	_, steps, _ := ReadImage(t, filepath.Join(out, "steps.tif"), tiles.Tile{})
	order := []string{f.Before, f.After, third}
	for q := range 2 {
		co := filepath.Join(dir, "chg"+string(rune('a'+q)))
		chg := RunChange(t, WorkersEnv(2), pairchange.ChangeOptions{Before: order[q], After: order[q+1], SharedOptions: series.SharedOptions{Out: co, Basis: basis,
			Threshold: thr, MinArea: jobkit.MinArea{Px: 4}, Normalize: series.NormalizeNone}})
		_, cm, _ := ReadImage(t, filepath.Join(co, "change.tif"), tiles.Tile{})
		var flagged, diff int64
		for i, c := range cm {
			s := steps[i*2+q]
			if (c == 1) != (s == timeline.StepConfirmed || s == timeline.StepUnconfirmed) || (c == 255) != (s == timeline.StepNoData) {
				diff++
			}
			if c == 1 {
				flagged++
			}
		}
		if diff != 0 || flagged != res.Steps[q].FlaggedPixels || chg.ChangedPixels != flagged {
			t.Errorf("step %d: %d pixels differ from change; change flags %d, timeline %d", q+1, diff, flagged, res.Steps[q].FlaggedPixels)
		}
		if res.Steps[q].Threshold.Z != chg.Threshold.Z {
			t.Errorf("step %d: threshold Z %v, change's %v", q+1, res.Steps[q].Threshold.Z, chg.Threshold.Z)
		}
	}
	if res.Steps[0].FlaggedPixels == 0 {
		t.Error("the scenario's events flag nothing at step 1")
	}
	for _, name := range []string{"first-change.tif", "last-change.tif", "change-count.tif", "max-magnitude.tif", "steps.tif", "changes.gpkg",
		"timeline.json", "timeline.png", "first-change.png", "report.html"} {
		if _, err := os.Stat(filepath.Join(out, name)); err != nil {
			t.Error(err)
		}
	}
	if _, err := os.Stat(filepath.Join(out, "step-z.tif")); err == nil {
		t.Error("the scratch step-z.tif was left in the folder")
	}
	// The caution travels with every output (the issue; change's rule).
	for _, name := range []string{"first-change.tif", "last-change.tif", "change-count.tif", "max-magnitude.tif", "steps.tif"} {
		md, err := raster.ReadMetadata(filepath.Join(out, name))
		if err != nil || md["BANDFOLD_CAUTION"] != jobkit.Caution {
			t.Errorf("%s caution %q, %v", name, md["BANDFOLD_CAUTION"], err)
		}
	}
	for _, name := range []string{"timeline.json", "report.html"} {
		data, err := os.ReadFile(filepath.Join(out, name))
		if err != nil || !strings.Contains(string(data), "screening result") {
			t.Errorf("%s lacks the caution (%v)", name, err)
		}
	}
	if res.Caution != jobkit.Caution {
		t.Errorf("the result's caution is %q", res.Caution)
	}
}

// TestTimelineRefusals: bad input is a one-line error and nothing is written.
func TestTimelineRefusals(t *testing.T) {
	dir := t.TempDir()
	f := ScenarioFiles(t, dir, 64, 3)
	third := thirdDate(t, f.Before, dir)
	undated := filepath.Join(dir, "undated.tif")
	CopyFile(t, third, undated)
	same := filepath.Join(dir, "again-2024-06-19.tif")
	CopyFile(t, third, same)
	other := filepath.Join(dir, "other-2026-01-01.tif")
	Synth(t, other, 3, 64, 64, 1)
	// A date whose every pixel is nodata: it covers none of the reference
	// date's valid pixels.
	empty := filepath.Join(dir, "empty-2025-06-19.tif")
	s, buf, _ := ReadImage(t, third, tiles.Tile{})
	nd := -9999.0
	for i := range buf {
		buf[i] = nd
	}
	WriteRasterFile(t, empty, raster.Spec{Grid: s.Grid, Bands: s.Len(), DataType: "Float32", NoData: &nd}, buf)
	// A date valid exactly where the reference date (the first) is not.
	apart := filepath.Join(dir, "apart-2025-06-19.tif")
	_, ref, refValid := ReadImage(t, f.Before, tiles.Tile{})
	if !slices.Contains(refValid, false) {
		t.Fatalf("%s has no nodata pixel: the case needs some", f.Before)
	}
	for i, ok := range refValid {
		for b := range s.Len() {
			buf[i*s.Len()+b] = nd
			if !ok {
				buf[i*s.Len()+b] = ref[i*s.Len()+b] + 1
			}
		}
	}
	WriteRasterFile(t, apart, raster.Spec{Grid: s.Grid, Bands: s.Len(), DataType: "Float32", NoData: &nd}, buf)
	out := filepath.Join(dir, "tl")
	tests := []struct {
		name   string
		o      timeline.TimelineOptions
		usage  bool
		expect []string
	}{
		{"one scene", timeline.TimelineOptions{Scenes: []string{f.Before}}, true, []string{"at least 2 scenes, got 1"}},
		{"dates of the wrong length", timeline.TimelineOptions{Scenes: []string{f.Before, f.After, third}, Dates: []string{"2020", "2021"}}, true, []string{"--dates lists 2 dates for 3 scenes"}},
		{"bad date", timeline.TimelineOptions{Scenes: []string{f.Before, f.After, third}, Dates: []string{"2020", "2021", "soon"}}, true, []string{`"soon"`}},
		{"no date", timeline.TimelineOptions{Scenes: []string{f.Before, f.After, undated}}, false, []string{undated, "has no date"}},
		{"same date", timeline.TimelineOptions{Scenes: []string{f.Before, f.After, same}}, true, []string{same, f.After, "same date 2024-06-19"}},
		{"grid differs", timeline.TimelineOptions{Scenes: []string{f.Before, f.After, other}}, false, []string{other, "pass --align"}},
		{"confirm", timeline.TimelineOptions{Scenes: []string{f.Before, f.After, third}, Confirm: "maybe"}, true, []string{`--confirm "maybe"`}},
		{"no valid pixel", timeline.TimelineOptions{Scenes: []string{f.Before, f.After, empty}}, false, []string{empty, "are nodata or NaN everywhere"}},
		{"no overlap", timeline.TimelineOptions{Scenes: []string{f.Before, f.After, apart}}, false, []string{apart, "no pixel is valid on both dates"}},
	}
	for _, tc := range tests {
		tc.o.Out = out
		_, err := timeline.Timeline(t.Context(), TestEnv, tc.o)
		WantError(t, tc.name, err, tc.usage, tc.expect...)
		if err != nil && strings.Contains(err.Error(), "\n") {
			t.Errorf("%s: error of several lines: %q", tc.name, err)
		}
		MustNotExist(t, tc.name, out)
	}
}
