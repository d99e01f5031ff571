package jobtest

import (
	"encoding/json"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/learn"
	"bandfold/cmd/bandfold/internal/pairchange"
	"bandfold/cmd/bandfold/internal/series"
	"bandfold/cmd/bandfold/internal/timeline"
)

// TestDocumentsMatchTheirSchemas: the JSON documents of real runs (a change
// and a timeline on the invented scenario, a basis, the output folders'
// manifests; the survey estimate's in package areasurvey) validate against their JSON
// Schemas in docs/schemas, so the documented layout is the written one.
func TestDocumentsMatchTheirSchemas(t *testing.T) {
	dir := t.TempDir()
	f := ScenarioFiles(t, dir, 96, 5)
	chg := filepath.Join(dir, "change")
	RunChange(t, TestEnv, pairchange.ChangeOptions{Before: f.Before, After: f.After, Reference: f.Truth, SharedOptions: series.SharedOptions{Out: chg}})
	ValidJSONFile(t, "change-summary", filepath.Join(chg, "summary.json"))
	ValidJSONFile(t, "output-manifest", filepath.Join(chg, "bandfold-output.json"))

	third := thirdDate(t, f.Before, dir)
	tl := filepath.Join(dir, "timeline")
	if _, err := timeline.Timeline(t.Context(), TestEnv, timeline.TimelineOptions{Scenes: []string{f.Before, f.After, third}, SharedOptions: series.SharedOptions{Out: tl}}); err != nil {
		t.Fatal(err)
	}
	ValidJSONFile(t, "timeline-summary", filepath.Join(tl, "timeline.json"))
	relativePaths(t, filepath.Join(chg, "summary.json"), "before", "after", "outputs", "reference.file")
	relativePaths(t, filepath.Join(tl, "timeline.json"), "scenes.path", "outputs")
	// Nothing written names the inputs' absolute paths, given as they
	// were: labels and metadata by base name.
	for _, file := range []string{"summary.json", "item.json", "change.tif.aux.xml", "change.tif", "timeline.json", "steps.tif", "first-change.tif"} {
		folder := chg
		if _, err := os.Stat(filepath.Join(chg, file)); err != nil {
			folder = tl
		}
		if data, err := os.ReadFile(filepath.Join(folder, file)); err != nil || strings.Contains(string(data), dir) {
			t.Errorf("%s: %v, or it names %s", file, err, dir)
		}
	}
	for _, folder := range []string{chg, tl} {
		checkItem(t, folder)
	}

	basis := filepath.Join(dir, "basis.json")
	Learn(t, TestEnv, learn.LearnOptions{Scenes: []string{f.Before}, Out: basis})
	ValidJSONFile(t, "basis", basis)

	ValidJSON(t, "result", MarshalOf(t, jobkit.Doc("bandfold-learn-result")))
}

// relativePaths checks that the paths a document records under keys
// (a dotted key descends into objects and lists) are relative to the
// document's folder and lead to the files from there, every input having
// been given by its absolute path (true by construction: the files exist).
func relativePaths(t *testing.T, doc string, keys ...string) {
	t.Helper()
	data, err := os.ReadFile(doc)
	if err != nil {
		t.Fatal(err)
	}
	var v any
	if err := json.Unmarshal(data, &v); err != nil {
		t.Fatal(err)
	}
	for _, key := range keys {
		paths := pathsAt(v, strings.Split(key, "."))
		if len(paths) == 0 {
			t.Errorf("%s: no %s", doc, key)
		}
		for _, p := range paths {
			if _, err := os.Stat(filepath.Join(filepath.Dir(doc), p)); filepath.IsAbs(p) || err != nil {
				t.Errorf("%s: %s %q is not a path from the document's folder to a file (%v)", doc, key, p, err)
			}
		}
	}
}

// pathsAt collects the strings under the key path of a decoded document.
func pathsAt(v any, key []string) []string {
	switch x := v.(type) {
	case string:
		if len(key) == 0 {
			return []string{x}
		}
	case []any:
		var out []string
		for _, e := range x {
			out = append(out, pathsAt(e, key)...)
		}
		return out
	case map[string]any:
		if len(key) > 0 {
			return pathsAt(x[key[0]], key[1:])
		}
	}
	return nil
}

// checkItem checks the STAC Item of an output folder: it follows the
// Item's required fields (docs/schemas/stac-item.schema.json, from the STAC
// 1.0.0 specification), every asset exists, every file of the folder is an
// asset, and its description carries the caution.
func checkItem(t *testing.T, folder string) {
	t.Helper()
	path := filepath.Join(folder, "item.json")
	ValidJSONFile(t, "stac-item", path)
	var item struct {
		Properties struct {
			Description string  `json:"description"`
			Start       string  `json:"start_datetime"`
			Datetime    *string `json:"datetime"`
		} `json:"properties"`
		BBox   []float64 `json:"bbox"`
		Assets map[string]struct {
			Href string `json:"href"`
		} `json:"assets"`
	}
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal(data, &item); err != nil {
		t.Fatal(err)
	}
	hrefs := map[string]bool{}
	for key, a := range item.Assets {
		if _, err := os.Stat(filepath.Join(folder, a.Href)); err != nil {
			t.Errorf("%s: asset %s: %v", path, key, err)
		}
		hrefs[filepath.Clean(a.Href)] = true
	}
	entries, err := os.ReadDir(folder)
	if err != nil {
		t.Fatal(err)
	}
	for _, e := range entries {
		if !hrefs[e.Name()] && e.Name() != "bandfold-output.json" {
			t.Errorf("%s: %s is not an asset", path, e.Name())
		}
	}
	if !strings.Contains(item.Properties.Description, jobkit.Caution) || item.Properties.Datetime != nil || item.Properties.Start == "" || len(item.BBox) != 4 {
		t.Errorf("%s: %+v", path, item)
	}
}
