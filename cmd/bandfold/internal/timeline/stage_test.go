package timeline_test

import (
	"fmt"
	"path/filepath"
	"testing"

	"bandfold/cmd/bandfold/internal/demo"
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/jobtest"
	"bandfold/cmd/bandfold/internal/series"
	"bandfold/cmd/bandfold/internal/timeline"
)

// timelineRasters are the rasters of a timeline folder a staged run must
// write byte for byte as a single run does.
var timelineRasters = []string{"steps.tif", "first-change.tif", "last-change.tif", "change-count.tif", "max-magnitude.tif"}

// runStaged runs a staged timeline: n scan shards, the fit, n map shards
// and the finish, each with env.
func runStaged(t *testing.T, env jobkit.Env, o timeline.TimelineOptions, n int) *timeline.TimelineResult {
	t.Helper()
	jobtest.RunStages(t, n, func(st series.Staging) error {
		s := o
		s.Staging = st
		_, err := timeline.TimelineStage(t.Context(), env, s)
		return err
	})
	o.Stage = series.StageFinish
	res, err := timeline.Timeline(t.Context(), env, o)
	if err != nil {
		t.Fatalf("--stage finish: %v", err)
	}
	return res
}

// TestStagedTimelineEqualsSingleRun: on the scenario's five-date series,
// a staged run of 1, 2, 3 and 7 shards writes what a single run writes
// (the rasters byte for byte, the summary with every step's patches and
// areas), with 1 or 2 workers. Known by construction: exact sums, a
// mergeable sample and the same fit.
func TestStagedTimelineEqualsSingleRun(t *testing.T) {
	dir := t.TempDir()
	_, files, err := demo.WriteSeries(t.Context(), jobtest.TestEnv, demo.SeriesWrite{Dir: dir, Size: 192, Seed: 7})
	if err != nil {
		t.Fatal(err)
	}
	o := timeline.TimelineOptions{Scenes: files.Dates, SharedOptions: series.SharedOptions{MinArea: jobkit.MinArea{Px: 4}, Input: jobkit.Input{Tile: 48}}}
	single := o
	single.Out = filepath.Join(dir, "single")
	want, err := timeline.Timeline(t.Context(), jobtest.TestEnv, single)
	if err != nil {
		t.Fatal(err)
	}
	for _, c := range jobtest.ShardCases {
		name := fmt.Sprintf("%d shards, %d workers", c.Shards, c.Workers)
		s := o
		s.Out = filepath.Join(dir, fmt.Sprintf("staged-%d-%d", c.Shards, c.Workers))
		got := runStaged(t, jobtest.WorkersEnv(c.Workers), s, c.Shards)
		jobtest.SameFolder(t, name, single.Out, s.Out, timelineRasters, want, got)
	}
}

// TestStagedTimelineRefusals: the stages of a timeline refuse what cannot
// make one whole run, in one line naming the file and the problem, and
// write nothing into the output folder (the machinery is change's, whose
// test covers every case; these are the timeline's own).
func TestStagedTimelineRefusals(t *testing.T) {
	dir := t.TempDir()
	_, files, err := demo.WriteSeries(t.Context(), jobtest.TestEnv, demo.SeriesWrite{Dir: dir, Size: 96, Seed: 3})
	if err != nil {
		t.Fatal(err)
	}
	base := timeline.TimelineOptions{Scenes: files.Dates, SharedOptions: series.SharedOptions{Input: jobkit.Input{Tile: 48}}}
	stage := func(o timeline.TimelineOptions, st string, n int) error {
		o.Staging = series.Staging{Stage: st}
		if st == series.StageScan || st == series.StageMap {
			o.Shard = jobkit.Shard{I: 0, N: n}
		}
		if st == series.StageFinish {
			_, err := timeline.Timeline(t.Context(), jobtest.TestEnv, o)
			return err
		}
		_, err := timeline.TimelineStage(t.Context(), jobtest.TestEnv, o)
		return err
	}
	must := func(err error) { jobtest.Must(t, err) }
	withOut := func(out string) timeline.TimelineOptions { o := base; o.Out = out; return o }
	jobtest.CheckRefusals(t, dir, []jobtest.Refusal{
		{Name: "finish before map", Run: func(out string) error {
			o := withOut(out)
			must(stage(o, "scan", 1))
			must(stage(o, "fit", 0))
			return stage(o, "finish", 0)
		}, Usage: true, Want: []string{".stages", "no map files", "run --stage map first"}},
		{Name: "other dates", Run: func(out string) error {
			o := withOut(out)
			must(stage(o, "scan", 1))
			o.Scenes = o.Scenes[1:]
			return stage(o, "fit", 0)
		}, Usage: true, Want: []string{"scan-0-of-1.gob", "other options", "Scenes"}},
		{Name: "another confirmation", Run: func(out string) error {
			o := withOut(out)
			must(stage(o, "scan", 1))
			must(stage(o, "fit", 0))
			o.Confirm = timeline.ConfirmNone
			return stage(o, "map", 1)
		}, Usage: true, Want: []string{"model.gob", "other options", "Confirm"}},
		{Name: "a missing map shard", Run: func(out string) error {
			o := withOut(out)
			must(stage(o, "scan", 1))
			must(stage(o, "fit", 0))
			must(stage(o, "map", 2))
			return stage(o, "finish", 0)
		}, Want: []string{"shard 1/2 is missing"}},
	})
}
