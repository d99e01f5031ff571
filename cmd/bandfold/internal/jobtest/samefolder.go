package jobtest

import (
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/series"
	"bytes"
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"
)

// SameFolder compares a staged run's output folder with a single run's:
// the files byte for byte (the same pixels, bit for bit, and the same
// metadata), and the summaries a and b member by member but for the
// folder's name in paths.
func SameFolder(t *testing.T, name, single, staged string, files []string, a, b any) {
	t.Helper()
	for _, f := range files {
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
	for k := range ja {
		if !reflect.DeepEqual(ja[k], jb[k]) {
			t.Errorf("%s: summary %s = %v, the single run's %v", name, k, jb[k], ja[k])
		}
	}
	if len(ja) != len(jb) {
		t.Errorf("%s: the summary has %d members, the single run's %d", name, len(jb), len(ja))
	}
}

// summaryJSON is a summary as JSON members, its folder's name cut out of
// paths.
func summaryJSON(t *testing.T, s any, dir string) map[string]any {
	t.Helper()
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

// ShardCases are the splits a staged run is compared with a single run
// on: 1, 2, 3 and 7 shards, each with 1 or 2 workers (both counts are
// covered, and 7 shards leave some with fewer tiles than others).
var ShardCases = []struct{ Shards, Workers int }{{1, 2}, {2, 1}, {3, 2}, {7, 1}}

// RunStages runs the scan, fit and map stages of a staged run of n
// shards through stage, one after another (the finish is the command's
// own run).
func RunStages(t *testing.T, n int, stage func(series.Staging) error) {
	t.Helper()
	for _, name := range []string{series.StageScan, series.StageFit, series.StageMap} {
		shards := n
		if name == series.StageFit {
			shards = 1
		}
		for i := range shards {
			st := series.Staging{Stage: name}
			if name != series.StageFit {
				st.Shard = jobkit.Shard{I: i, N: n}
			}
			if err := stage(st); err != nil {
				t.Fatalf("--stage %s --shard %s: %v", name, st.Shard, err)
			}
		}
	}
}

// Refusal is a case a run must refuse: Run runs it into the output folder
// out; the error must be a usage error when Usage is set, and hold Want.
type Refusal struct {
	Name  string
	Run   func(out string) error
	Usage bool
	Want  []string
}

// CheckRefusals runs each case with an output folder of its own in dir:
// its error must be one line holding what the case wants, and nothing may
// be written into the output folder.
func CheckRefusals(t *testing.T, dir string, cases []Refusal) {
	t.Helper()
	for i, tc := range cases {
		out := filepath.Join(dir, fmt.Sprintf("out%d", i))
		err := tc.Run(out)
		WantError(t, tc.Name, err, tc.Usage, tc.Want...)
		if err != nil && strings.Contains(err.Error(), "\n") {
			t.Errorf("%s: the error is not one line", tc.Name)
		}
		MustNotExist(t, tc.Name, out)
	}
}

// Must fails t on err.
func Must(t *testing.T, err error) {
	t.Helper()
	if err != nil {
		t.Fatal(err)
	}
}
