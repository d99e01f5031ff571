package pairchange_test

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"

	"bandfold/cmd/bandfold/internal/changefolder"
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/jobtest"
	"bandfold/cmd/bandfold/internal/pairchange"
	"bandfold/cmd/bandfold/internal/series"
)

// runStaged runs a staged change: n scan shards, the fit, n map shards
// and the finish, each with env.
func runStaged(t *testing.T, env jobkit.Env, o pairchange.ChangeOptions, n int) *changefolder.ChangeResult {
	t.Helper()
	for _, stage := range []string{pairchange.StageScan, pairchange.StageFit, pairchange.StageMap} {
		shards := n
		if stage == pairchange.StageFit {
			shards = 1
		}
		for i := range shards {
			s := o
			s.Stage = stage
			if stage != pairchange.StageFit {
				s.Shard = jobkit.Shard{I: i, N: n}
			}
			if _, err := pairchange.ChangeStage(t.Context(), env, s); err != nil {
				t.Fatalf("--stage %s --shard %d/%d: %v", stage, i, n, err)
			}
		}
	}
	o.Stage = pairchange.StageFinish
	return jobtest.RunChange(t, env, o)
}

// sameFolder compares a staged run's change folder with a single run's:
// change.tif and magnitude.tif byte for byte (the same pixels, bit for
// bit, and the same metadata), and the summaries but for the folder's
// name in the outputs' paths.
func sameFolder(t *testing.T, name, single, staged string, a, b *changefolder.ChangeResult) {
	t.Helper()
	for _, f := range []string{"change.tif", "magnitude.tif"} {
		x, err1 := os.ReadFile(filepath.Join(single, f))
		y, err2 := os.ReadFile(filepath.Join(staged, f))
		if err1 != nil || err2 != nil {
			t.Fatalf("%s: %v %v", name, err1, err2)
		}
		if !bytes.Equal(x, y) {
			t.Errorf("%s: %s differs from the single run's", name, f)
		}
	}
	ja, jb := summaryJSON(t, a, single), summaryJSON(t, b, staged)
	if !reflect.DeepEqual(ja, jb) {
		for k := range ja {
			if !reflect.DeepEqual(ja[k], jb[k]) {
				t.Errorf("%s: summary %s = %v, the single run's %v", name, k, jb[k], ja[k])
			}
		}
	}
	if a.Patches != b.Patches || a.ChangedPixels != b.ChangedPixels || !reflect.DeepEqual(a.ChangedAreaM2, b.ChangedAreaM2) {
		t.Errorf("%s: %d patches, %d pixels changed; the single run's %d, %d", name, b.Patches, b.ChangedPixels, a.Patches, a.ChangedPixels)
	}
}

// summaryJSON is a summary as JSON members, its folder's name cut out of
// the outputs' paths.
func summaryJSON(t *testing.T, s *changefolder.ChangeResult, dir string) map[string]any {
	data, err := json.Marshal(s)
	if err != nil {
		t.Fatal(err)
	}
	data = []byte(strings.ReplaceAll(string(data), dir, "DIR"))
	var m map[string]any
	if err := json.Unmarshal(data, &m); err != nil {
		t.Fatal(err)
	}
	return m
}

// TestStagedChangeEqualsSingleRun: on the demo pair and on a pair of
// noisy copies of the real Landsat 7 subset, a staged run of 1, 2 and 3
// shards writes what a single run writes, for 1 and 2 workers (known by
// construction: exact sums, a mergeable sample and the same fit).
func TestStagedChangeEqualsSingleRun(t *testing.T) {
	dir := t.TempDir()
	demo := jobtest.ScenarioFiles(t, dir, 256, 7)
	pairs := []struct {
		name, before, after string
		landsat             bool
	}{
		{"demo", demo.Before, demo.After, false},
		{"landsat", filepath.Join(dir, "a.tif"), filepath.Join(dir, "b.tif"), true},
	}
	for _, pr := range pairs {
		if pr.landsat {
			jobtest.NeedLandsat(t)
			jobtest.NoisyCopy(t, pr.before, 1, 0)
			jobtest.NoisyCopy(t, pr.after, 2, 3)
		}
		o := pairchange.ChangeOptions{Before: pr.before, After: pr.after, MinArea: jobkit.MinArea{Px: 4}, PValues: true, Input: jobkit.Input{Tile: 64}}
		single := o
		single.Out = filepath.Join(dir, pr.name+"-single")
		want := jobtest.RunChange(t, jobtest.TestEnv, single)
		for _, n := range []int{1, 2, 3} {
			for _, workers := range []int{1, 2} {
				name := fmt.Sprintf("%s, %d shards, %d workers", pr.name, n, workers)
				s := o
				s.Out = filepath.Join(dir, fmt.Sprintf("%s-%d-%d", pr.name, n, workers))
				got := runStaged(t, jobtest.WorkersEnv(workers), s, n)
				sameFolder(t, name, single.Out, s.Out, want, got)
				if _, err := os.Stat(series.WorkArea(s.Out)); err != nil {
					t.Errorf("%s: no work area: %v", name, err)
				}
			}
		}
	}
}

// TestStagedChangeRefusals: the stages refuse what cannot make one whole
// run, in one line naming the file and the problem, writing nothing into
// the output folder.
func TestStagedChangeRefusals(t *testing.T) {
	dir := t.TempDir()
	demo := jobtest.ScenarioFiles(t, dir, 128, 3)
	after := filepath.Join(dir, "after.tif")
	jobtest.CopyFile(t, demo.After, after)
	base := pairchange.ChangeOptions{Before: demo.Before, After: after, Input: jobkit.Input{Tile: 32}}
	stage := func(o pairchange.ChangeOptions, st string, i, n int) error {
		o.Stage, o.Shard = st, jobkit.Shard{I: i, N: n}
		if st == pairchange.StageFit {
			o.Shard = jobkit.Shard{}
		}
		if st == pairchange.StageFinish {
			_, err := pairchange.Change(t.Context(), jobtest.TestEnv, o)
			return err
		}
		_, err := pairchange.ChangeStage(t.Context(), jobtest.TestEnv, o)
		return err
	}
	must := func(err error) {
		t.Helper()
		if err != nil {
			t.Fatal(err)
		}
	}
	tests := []struct {
		name  string
		run   func(o pairchange.ChangeOptions) error
		usage bool
		want  []string
	}{
		{"map before fit", func(o pairchange.ChangeOptions) error {
			must(stage(o, "scan", 0, 1))
			return stage(o, "map", 0, 1)
		}, true, []string{"model.gob", "run --stage fit"}},
		{"a missing scan shard", func(o pairchange.ChangeOptions) error {
			must(stage(o, "scan", 0, 2))
			return stage(o, "fit", 0, 0)
		}, false, []string{"shard 1/2 is missing"}},
		{"a mixed set", func(o pairchange.ChangeOptions) error {
			must(stage(o, "scan", 0, 2))
			must(stage(o, "scan", 1, 2))
			must(stage(o, "scan", 0, 3))
			return stage(o, "fit", 0, 0)
		}, false, []string{"scan-0-of-3.gob is shard 0/3, of another split"}},
		{"a shard run twice", func(o pairchange.ChangeOptions) error {
			must(stage(o, "scan", 0, 1))
			return stage(o, "scan", 0, 1)
		}, false, []string{"scan-0-of-1.gob", "exists"}},
		{"other options", func(o pairchange.ChangeOptions) error {
			must(stage(o, "scan", 0, 1))
			o.Sample = 500
			return stage(o, "fit", 0, 0)
		}, true, []string{"scan-0-of-1.gob", "other options", "Sample"}},
		{"another scene", func(o pairchange.ChangeOptions) error {
			must(stage(o, "scan", 0, 1))
			appendByte(t, after) // another file now, of another size
			defer jobtest.CopyFile(t, demo.After, after)
			return stage(o, "fit", 0, 0)
		}, false, []string{"scan-0-of-1.gob", "other inputs"}},
		{"a missing map shard", func(o pairchange.ChangeOptions) error {
			must(stage(o, "scan", 0, 1))
			must(stage(o, "fit", 0, 0))
			must(stage(o, "map", 1, 2))
			return stage(o, "finish", 0, 0)
		}, false, []string{"shard 0/2 is missing"}},
		{"a piece of an earlier fit", func(o pairchange.ChangeOptions) error {
			must(stage(o, "scan", 0, 1))
			must(stage(o, "fit", 0, 0))
			must(stage(o, "map", 0, 1))
			appendByte(t, series.StagePath(o.Out, series.KindModel, jobkit.Shard{})) // as if fitted again on other partials
			return stage(o, "finish", 0, 0)
		}, false, []string{"map-0-of-1.gob", "another model"}},
		{"a shard of fit", func(o pairchange.ChangeOptions) error {
			o.Stage, o.Shard = "fit", jobkit.Shard{I: 1, N: 2}
			_, err := pairchange.ChangeStage(t.Context(), jobtest.TestEnv, o)
			return err
		}, true, []string{"--shard 1/2 applies to --stage scan and map only"}},
	}
	for i, tc := range tests {
		o := base
		o.Out = filepath.Join(dir, fmt.Sprintf("out%d", i))
		err := tc.run(o)
		jobtest.WantError(t, tc.name, err, tc.usage, tc.want...)
		if err != nil && strings.Contains(err.Error(), "\n") {
			t.Errorf("%s: the error is not one line", tc.name)
		}
		jobtest.MustNotExist(t, tc.name, o.Out)
	}
}

// appendByte makes path another file, still readable.
func appendByte(t *testing.T, path string) {
	f, err := os.OpenFile(path, os.O_APPEND|os.O_WRONLY, 0)
	if err == nil {
		_, err = f.Write([]byte{0})
		err = errors.Join(err, f.Close())
	}
	if err != nil {
		t.Fatal(err)
	}
}
