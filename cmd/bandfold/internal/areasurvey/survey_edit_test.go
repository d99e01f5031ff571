package areasurvey_test

import (
	"fmt"
	"math"
	"path/filepath"
	"strings"
	"testing"

	"bandfold/cmd/bandfold/internal/areasurvey"
	"bandfold/cmd/bandfold/internal/jobtest"
	"bandfold/raster"
)

// setField sets field k of the first row whose map class is class.
func setField(class string, k int, v string) func([]string) []string {
	return func(rows []string) []string {
		for i, r := range rows {
			f := strings.Split(r, ",")
			if f[2] == class {
				f[k] = v
				rows[i] = strings.Join(f, ",")
				break
			}
		}
		return rows
	}
}

// dropRows drops the first n rows of map class class.
func dropRows(class string, n int) func([]string) []string {
	return func(rows []string) []string {
		var out []string
		for _, r := range rows {
			if n > 0 && strings.Split(r, ",")[2] == class {
				n--
				continue
			}
			out = append(out, r)
		}
		return out
	}
}

// wantAreas checks the estimate of a survey of pixelSurvey's map labelled
// by a perfect interpreter: mapped and estimated areas are the map's
// pixel counts (known by construction), whatever rows the file holds.
func wantAreas(t *testing.T, name string, e *areasurvey.SurveyEstimateResult) {
	t.Helper()
	want := map[string]float64{"change": pxChange, "no change": pxNoChange}
	for k, c := range e.Classes {
		f := want[c.Class] / (pxChange + pxNoChange)
		if math.Abs(c.AreaFraction-f) > 1e-12 || c.AreaFractionSE > 1e-12 {
			t.Errorf("%s: %s area fraction %v ± %v, want %v ± 0 (known by construction)", name, c.Class, c.AreaFraction, c.AreaFractionSE, f)
		}
		if k == 0 && e.Drawn != pxDrawn {
			t.Errorf("%s: %d points drawn, want %d", name, e.Drawn, pxDrawn)
		}
	}
}

// TestSurveyEstimateTakesAreasFromTheDraw (issue 24, item 1): the strata's
// areas come from what the draw recorded of the map, never from the rows.
// Deleting rows (from the CSV or GeoPackage features) leaves the estimate
// of a perfect interpreter at the map's areas and is reported as points
// missing; pasted rows, edited weights (doubled, negative, NaN) and ids the
// draw never made are refused in one line naming the file, the line and
// the problem. Before, deleting rows shrank the mapped area, pasting the
// change rows doubled it, and a NaN weight failed with "json: unsupported
// value: NaN".
func TestSurveyEstimateTakesAreasFromTheDraw(t *testing.T) {
	dir := t.TempDir()
	mapPath, csvPath := pixelSurvey(t, dir)
	labelled := readText(t, csvPath)
	pasteChange := func(rows []string) []string {
		for _, r := range rows {
			if strings.Split(r, ",")[2] == "change" {
				rows = append(rows, r)
			}
		}
		return rows
	}
	renumber := func(rows []string) []string {
		rows[0] = "101" + rows[0][strings.Index(rows[0], ","):]
		return rows
	}
	cases := []struct {
		name    string
		edit    func([]string) []string
		missing int
		want    []string // a refusal's message parts; nil for an estimate
	}{
		{"as drawn", func(r []string) []string { return r }, 0, nil},
		{"30 no-change rows deleted", dropRows("no change", 30), 30, nil},
		{"5 change rows deleted", dropRows("change", 5), 5, nil},
		{"change rows pasted twice", pasteChange, 0, []string{"appears again", "line"}},
		{"weight doubled", setField("change", 7, fmt.Sprint(2*float64(pxChange)/20)), 0, []string{"weight 30.1", "stratum \"change\"", "line"}},
		{"weight negative", setField("no change", 7, "-33.7375"), 0, []string{"weight -33.7375", "weighs 33.7375", "line"}},
		{"weight NaN", setField("no change", 7, "NaN"), 0, []string{`weight "NaN" is not a number`, "line"}},
		{"id never drawn", renumber, 0, []string{"id 101 is not one of the points drawn (1 to 100)"}},
		{"stratum moved", setField("no change", 1, "change"), 0, []string{"stratum \"change\" with map class \"no change\""}},
	}
	for _, c := range cases {
		path := filepath.Join(dir, strings.ReplaceAll(c.name, " ", "_")+".csv")
		writeText(t, path, editRows(labelled, c.edit))
		e, err := areasurvey.SurveyEstimate(t.Context(), jobtest.TestEnv, areasurvey.SurveyEstimateOptions{Dir: mapPath, Survey: path, Overwrite: true})
		if c.want != nil {
			jobtest.WantError(t, c.name, err, false, append(c.want, path)...)
			continue
		}
		if err != nil {
			t.Errorf("%s: %v", c.name, err)
			continue
		}
		wantAreas(t, c.name, e)
		if e.Missing != c.missing || len(e.MissingIDs) != c.missing || e.Labelled != pxDrawn-c.missing {
			t.Errorf("%s: %d labelled, %d missing (%v), want %d and %d (known by construction)", c.name, e.Labelled, e.Missing, e.MissingIDs, pxDrawn-c.missing, c.missing)
		}
	}
}

// TestSurveyEstimateFromAnEditedGeoPackage (issue 24, item 1): features
// deleted from the GeoPackage are points missing, counted and named, and
// leave the estimate of a perfect interpreter at the map's areas (known by
// construction, see pixelSurvey); a NaN weight (which the GeoPackage
// stores as empty) is refused naming the feature. Before, deleted features
// shrank the mapped area without a word.
func TestSurveyEstimateFromAnEditedGeoPackage(t *testing.T) {
	dir := t.TempDir()
	mapPath, _ := pixelSurvey(t, dir)
	pts, err := raster.ReadPoints(filepath.Join(dir, "survey.gpkg"))
	if err != nil {
		t.Fatal(err)
	}
	for i := range pts.Points {
		pts.Points[i].Reference = pts.Points[i].MapClass
	}
	fewer := &raster.Points{CRS: pts.CRS, Metadata: pts.Metadata, Points: pts.Points[10:]}
	gpkg := filepath.Join(dir, "fewer", "survey.gpkg")
	if err := raster.WritePoints(gpkg, fewer, false); err != nil {
		t.Fatal(err)
	}
	e, err := areasurvey.SurveyEstimate(t.Context(), jobtest.TestEnv, areasurvey.SurveyEstimateOptions{Dir: mapPath, Survey: gpkg})
	if err != nil || e.Missing != 10 || e.MissingIDs[0] != 1 || e.MissingIDs[9] != 10 {
		t.Fatalf("10 features deleted: %v, %+v", err, e)
	}
	wantAreas(t, "10 features deleted", e)
	// estimate.json as written follows its JSON Schema (docs/schemas).
	jobtest.ValidJSONFile(t, "survey-estimate", e.Paths.Resolve(e.Outputs[0]))
	pts.Points[3].Weight = math.NaN()
	nan := filepath.Join(dir, "nan", "survey.gpkg")
	if err := raster.WritePoints(nan, pts, false); err != nil {
		t.Fatal(err)
	}
	_, err = areasurvey.SurveyEstimate(t.Context(), jobtest.TestEnv, areasurvey.SurveyEstimateOptions{Dir: mapPath, Survey: nan})
	jobtest.WantError(t, "NaN weight in the GeoPackage", err, false, nan, "feature 4", "no weight")
	jobtest.MustNotExist(t, "NaN weight in the GeoPackage", filepath.Join(dir, "nan", "estimate.json"))
}
