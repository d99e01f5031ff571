package jobtest

import (
	"path/filepath"
	"testing"

	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/learn"
	"bandfold/cmd/bandfold/internal/pairchange"
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
	RunChange(t, TestEnv, pairchange.ChangeOptions{Before: f.Before, After: f.After, Reference: f.Truth, Out: chg})
	ValidJSONFile(t, "change-summary", filepath.Join(chg, "summary.json"))
	ValidJSONFile(t, "output-manifest", filepath.Join(chg, "bandfold-output.json"))

	third := thirdDate(t, f.Before, dir)
	tl := filepath.Join(dir, "timeline")
	if _, err := timeline.Timeline(t.Context(), TestEnv, timeline.TimelineOptions{Scenes: []string{f.Before, f.After, third}, Out: tl}); err != nil {
		t.Fatal(err)
	}
	ValidJSONFile(t, "timeline-summary", filepath.Join(tl, "timeline.json"))

	basis := filepath.Join(dir, "basis.json")
	Learn(t, TestEnv, learn.LearnOptions{Scenes: []string{f.Before}, Out: basis})
	ValidJSONFile(t, "basis", basis)

	ValidJSON(t, "result", MarshalOf(t, jobkit.Doc("bandfold-learn-result")))
}
