package areasurvey_test

import (
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"bandfold/cmd/bandfold/internal/areasurvey"
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/jobtest"
	"bandfold/cmd/bandfold/internal/pairchange"
	"bandfold/cmd/bandfold/internal/series"
	"bandfold/raster/output"
)

// TestSurveyInTheChangeFolder (issue 24, items 6 and 5): a survey drawn
// into the change folder it samples is labelled and estimated there, again
// and again; the folder's report gains the estimate and the survey's files
// stay outside the folder's manifest, so that a later change --overwrite
// refuses to delete the labels. A failure leaves nothing: no estimate.json,
// the report as it was. The survey never replaces a file of the change
// folder. Before, the estimate failed on the survey's own files ("holds
// files that are not a previous bandfold output") after writing
// estimate.json, so every rerun failed on that file too; and survey draw
// --out DIR/changes.gpkg --overwrite replaced the change polygons. Every
// expectation is known by construction (the files each step wrote).
func TestSurveyInTheChangeFolder(t *testing.T) {
	dir := t.TempDir()
	f := jobtest.ScenarioFiles(t, dir, 256, 7)
	out := filepath.Join(dir, "chg")
	jobtest.RunChange(t, jobtest.TestEnv, pairchange.ChangeOptions{Before: f.Before, After: f.After, SharedOptions: series.SharedOptions{Out: out, MinArea: jobkit.MinArea{Px: 4}}})
	gpkg := filepath.Join(out, "survey.gpkg")
	if _, err := areasurvey.SurveyDraw(t.Context(), jobtest.TestEnv, areasurvey.SurveyDrawOptions{Dir: out, Out: gpkg, Points: 120, Buffer: "0", MinPerStratum: 40, Seed: 2}); err != nil {
		t.Fatal(err)
	}
	csvPath := filepath.Join(out, "survey.csv")
	writeText(t, csvPath, labelRows(t, readText(t, csvPath), func(_ int, mapClass string) string { return mapClass }))
	manifest := readText(t, filepath.Join(out, output.ManifestName))
	estimate := func(name string, overwrite bool) error {
		_, err := areasurvey.SurveyEstimate(t.Context(), jobtest.TestEnv, areasurvey.SurveyEstimateOptions{Dir: out, Survey: csvPath, Overwrite: overwrite})
		return err
	}
	for _, run := range []struct {
		name      string
		overwrite bool
	}{{"first estimate", false}, {"rerun with --overwrite", true}} {
		if err := estimate(run.name, run.overwrite); err != nil {
			t.Fatalf("%s: %v", run.name, err)
		}
	}
	if html := readText(t, filepath.Join(out, "report.html")); !strings.Contains(html, "Estimated area from the reference survey") || !strings.Contains(html, "screening result") {
		t.Error("report.html lacks the estimate or the caution")
	}
	if got := readText(t, filepath.Join(out, output.ManifestName)); got != manifest {
		t.Errorf("the manifest changed: %s, was %s", got, manifest)
	}
	if err := output.CheckFolder(out, true); !errors.Is(err, output.ErrForeignFolder) {
		t.Errorf("change --overwrite could replace the folder and its labelled survey: %v", err)
	}
	// A failing estimate changes nothing: a label no one can read, then a
	// report.html the manifest does not list (someone else's).
	report := readText(t, filepath.Join(out, "report.html"))
	os.Remove(filepath.Join(out, "estimate.json"))
	labelled := readText(t, csvPath)
	writeText(t, csvPath, labelRows(t, labelled, func(i int, c string) string { return map[bool]string{true: "maybe", false: c}[i == 7] }))
	jobtest.WantError(t, "unreadable label", estimate("unreadable label", false), false, csvPath, `"maybe"`)
	writeText(t, csvPath, labelled)
	writeText(t, filepath.Join(out, output.ManifestName), strings.Replace(manifest, `"report.html",`, "", 1))
	jobtest.WantError(t, "report not listed", estimate("report not listed", false), false, out, "report.html", "not listed")
	jobtest.MustNotExist(t, "failed estimates", filepath.Join(out, "estimate.json"))
	if readText(t, filepath.Join(out, "report.html")) != report {
		t.Error("a failed estimate changed report.html")
	}
	jobtest.NoTemporaries(t, out)
	writeText(t, filepath.Join(out, output.ManifestName), manifest)
	// The change folder's own files are never the survey's outputs.
	polygons := readText(t, filepath.Join(out, "changes.gpkg"))
	_, err := areasurvey.SurveyDraw(t.Context(), jobtest.TestEnv, areasurvey.SurveyDrawOptions{Dir: out, Out: filepath.Join(out, "changes.gpkg"), Points: 120, Buffer: "0", MinPerStratum: 40, Seed: 2, Overwrite: true})
	jobtest.WantError(t, "survey over changes.gpkg", err, false, filepath.Join(out, "changes.gpkg"), "a file of the output folder", "another name")
	if readText(t, filepath.Join(out, "changes.gpkg")) != polygons {
		t.Error("survey draw replaced changes.gpkg")
	}
	jobtest.MustNotExist(t, "survey over changes.gpkg", filepath.Join(out, "changes.csv"))
}
