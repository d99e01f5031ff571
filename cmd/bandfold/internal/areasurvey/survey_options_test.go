package areasurvey_test

import (
	"math"
	"path/filepath"
	"testing"

	"bandfold/cmd/bandfold/internal/areasurvey"
	"bandfold/cmd/bandfold/internal/jobtest"
)

// TestSurveyDrawRefusesOptionsThatCannotBeRight (issue 24, items 9, 10
// and 11): option values that are wrong whatever the map are usage errors
// (exit 2) naming the option, before anything is read or written: an
// output that is not a GeoPackage, --points with --target-se (one of them
// would be ignored), --target-se NaN or infinite, --expected-accuracy
// without --target-se (ignored), an unknown class or a value that is not
// an accuracy in it. Before, --out s.csv exited 1 with "survey CSV s.csv
// is the same file as survey s.csv", --points was ignored beside
// --target-se, an unknown class was ignored, and --target-se NaN was
// reported as "--points 0". Known by construction: each case has the one
// fault its name says.
func TestSurveyDrawRefusesOptionsThatCannotBeRight(t *testing.T) {
	dir := t.TempDir()
	mapPath, _ := pixelSurvey(t, dir)
	out := filepath.Join(dir, "new", "s.gpkg")
	acc := map[string]float64{"change": 0.7, "no change": 0.95}
	cases := []struct {
		name string
		o    areasurvey.SurveyDrawOptions
		want []string
	}{
		{"out a CSV", areasurvey.SurveyDrawOptions{Out: filepath.Join(dir, "new", "s.csv"), Points: 60}, []string{"--out", "s.csv", ".gpkg"}},
		{"out without extension", areasurvey.SurveyDrawOptions{Out: filepath.Join(dir, "new", "s"), Points: 60}, []string{"--out", ".gpkg"}},
		{"points and target-se", areasurvey.SurveyDrawOptions{Points: 60, TargetSE: 0.05, ExpectedAccuracy: acc}, []string{"--points 60", "--target-se 0.05", "give one"}},
		{"target-se NaN", areasurvey.SurveyDrawOptions{TargetSE: math.NaN(), ExpectedAccuracy: acc}, []string{"--target-se NaN", "more than 0"}},
		{"target-se infinite", areasurvey.SurveyDrawOptions{TargetSE: math.Inf(1), ExpectedAccuracy: acc}, []string{"--target-se +Inf", "less than 1"}},
		{"no sample size", areasurvey.SurveyDrawOptions{}, []string{"no sample size", "--points", "--target-se"}},
		{"accuracy without target-se", areasurvey.SurveyDrawOptions{Points: 60, ExpectedAccuracy: acc}, []string{"--expected-accuracy", "only with --target-se"}},
		{"unknown class", areasurvey.SurveyDrawOptions{TargetSE: 0.05, ExpectedAccuracy: map[string]float64{"change": 0.7, "chnage": 0.9}}, []string{`unknown class "chnage"`, "change, no change or near change"}},
		{"accuracy NaN", areasurvey.SurveyDrawOptions{TargetSE: 0.05, ExpectedAccuracy: map[string]float64{"change": math.NaN(), "no change": 0.9}}, []string{"--expected-accuracy change=NaN"}},
	}
	for _, c := range cases {
		o := c.o
		o.Map, o.Buffer, o.MinPerStratum, o.Seed = mapPath, "0", 20, 1
		if o.Out == "" {
			o.Out = out
		}
		_, err := areasurvey.SurveyDraw(t.Context(), jobtest.TestEnv, o)
		jobtest.WantError(t, c.name, err, true, c.want...)
		jobtest.MustNotExist(t, c.name, filepath.Join(dir, "new"))
	}
	// Class names as people write them are the survey's classes.
	o := areasurvey.SurveyDrawOptions{Map: mapPath, Out: out, Buffer: "0", MinPerStratum: 20, Seed: 1, TargetSE: 0.02, ExpectedAccuracy: map[string]float64{"Change": 0.7, "no_change": 0.95}}
	if _, err := areasurvey.SurveyDraw(t.Context(), jobtest.TestEnv, o); err != nil {
		t.Errorf("Change and no_change: %v", err)
	}
}
