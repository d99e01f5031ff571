package areasurvey_test

import (
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"gonum.org/v1/gonum/stat/distuv"

	"bandfold/cmd/bandfold/internal/areasurvey"
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/jobtest"
	"bandfold/cmd/bandfold/internal/pairchange"
	"bandfold/cmd/bandfold/internal/scenario"
	"bandfold/cmd/bandfold/internal/series"
	"bandfold/raster"
	"bandfold/transform/survey"
)

// knownErrorMap returns the scenario's truth of side n and a map made from
// it with known errors (known by construction): a tenth of the change
// pixels on patch edges turned to no change (omission) and scattered false
// alarms (commission). Codes: 1 change, 0 no change, 255 outside.
func knownErrorMap(t *testing.T, n int) (truth, m []uint8) {
	t.Helper()
	c, err := scenario.NewCatchment(n, n, 7)
	if err != nil {
		t.Fatal(err)
	}
	truth = make([]uint8, n*n)
	c.Truth(0, 0, n, n, truth)
	m = append([]uint8(nil), truth...)
	changed := 0
	for _, v := range truth {
		if v == 1 {
			changed++
		}
	}
	omit := changed / 10
	for i := 0; i < len(m) && omit > 0; i++ {
		x, y := i%n, i/n
		if truth[i] != 1 || x == 0 || y == 0 || x == n-1 || y == n-1 {
			continue
		}
		if truth[i-1] == 0 || truth[i+1] == 0 || truth[i-n] == 0 || truth[i+n] == 0 {
			m[i] = 0
			omit--
		}
	}
	for i := range m {
		if truth[i] == 0 && (uint64(i)*0x9e3779b97f4a7c15)>>54 < 4 { // about 0.4% false alarms
			m[i] = 1
		}
	}
	return truth, m
}

// TestSurveyCoverage: over 200 seeds the 95% interval of the change area
// covers the true area (known by construction) in 184 to 196 draws (92-98%).
// Under a binomial(200, 0.95) law that range has probability
// P(184 <= X <= 196) = 0.967 (computed and logged below), so a correct
// estimator fails it for about 3% of arbitrary seed sets; the seeds here
// are fixed. The near-change stratum (1 px) holds the edge omissions. The mean estimate must lie within 2 standard errors
// (of the mean of the 200 estimates) of the truth.
func TestSurveyCoverage(t *testing.T) {
	const side, draws = 512, 200
	truth, m := knownErrorMap(t, side)
	// Strata: 0 no change, 1 change, 2 no change within 1 px (Chebyshev)
	// of mapped change, where the omissions lie.
	strata := append([]uint8(nil), m...)
	for i, v := range m {
		if v != 0 {
			continue
		}
		x, y := i%side, i/side
		for dy := -1; dy <= 1 && strata[i] == 0; dy++ {
			for dx := -1; dx <= 1; dx++ {
				if xx, yy := x+dx, y+dy; xx >= 0 && yy >= 0 && xx < side && yy < side && m[yy*side+xx] == 1 {
					strata[i] = 2
					break
				}
			}
		}
	}
	var counts [3]int
	trueChange := 0
	var pos [3][]int
	for i, v := range strata {
		if v > 2 {
			continue
		}
		counts[v]++
		pos[v] = append(pos[v], i)
		if truth[i] == 1 {
			trueChange++
		}
	}
	areas := []float64{float64(counts[0]), float64(counts[1]), float64(counts[2])}
	mapOf := []int{1, 0, 1} // stratum -> map class (0 change, 1 no change)
	sizes, err := survey.Allocate(areas, counts[:], 600, 150)
	if err != nil {
		t.Fatal(err)
	}
	covered := 0
	var sum, sum2 float64
	for seed := range uint64(draws) {
		ranks := survey.Draw(counts[:], sizes, seed)
		var units []survey.Unit
		for h := range 3 {
			for _, r := range ranks[h] {
				ref := 1 - int(truth[pos[h][r]]) // class 0 = change
				units = append(units, survey.Unit{Stratum: h, Map: mapOf[h], Ref: ref})
			}
		}
		e, err := survey.Stehman(units, areas, 2)
		if err != nil {
			t.Fatal(err)
		}
		a, se := e.Area[0]*e.Total, e.AreaSE[0]*e.Total
		lo, hi := survey.CI95(a, se)
		if lo <= float64(trueChange) && float64(trueChange) <= hi {
			covered++
		}
		sum += a
		sum2 += a * a
	}
	mean := sum / draws
	sem := math.Sqrt((sum2/draws - mean*mean) / (draws - 1))
	b := distuv.Binomial{N: draws, P: 0.95}
	p := b.CDF(196) - b.CDF(183)
	t.Logf("coverage %d of %d (%.1f%%); P(184 <= X <= 196 | binomial(200, 0.95)) = %.4f; mean %.1f px, truth %d px, standard error of the mean %.1f px; strata %v px",
		covered, draws, 100*float64(covered)/draws, p, mean, trueChange, sem, counts)
	if covered < 184 || covered > 196 {
		t.Errorf("the 95%% interval covered the true change area in %d of %d draws, want 184-196", covered, draws)
	}
	if math.Abs(mean-float64(trueChange)) > 2*sem {
		t.Errorf("mean estimate %.1f px, truth %d px: more than 2 standard errors (%.1f) apart", mean, trueChange, sem)
	}
}

// TestSurveyDrawAndEstimate runs change, draws a survey with a buffer
// stratum, labels it from the truth (an automated interpreter), estimates
// from the GeoPackage and the CSV, and checks the refusals.
func TestSurveyDrawAndEstimate(t *testing.T) {
	dir := t.TempDir()
	f := jobtest.ScenarioFiles(t, dir, 256, 7)
	out := filepath.Join(dir, "chg")
	jobtest.RunChange(t, jobtest.TestEnv, pairchange.ChangeOptions{Before: f.Before, After: f.After, SharedOptions: series.SharedOptions{Out: out, MinArea: jobkit.MinArea{Px: 4}}})
	gpkg := filepath.Join(dir, "survey", "survey.gpkg")
	res, err := areasurvey.SurveyDraw(t.Context(), jobtest.TestEnv, areasurvey.SurveyDrawOptions{Dir: out, Out: gpkg, Points: 200, Buffer: "35m", MinPerStratum: 30, Seed: 3})
	if err != nil {
		t.Fatal(err)
	}
	if res.Points != 200 || len(res.Strata) != 3 || res.Caution != jobkit.Caution {
		t.Fatalf("draw %+v", res)
	}
	again, err := areasurvey.SurveyDraw(t.Context(), jobtest.WorkersEnv(3), areasurvey.SurveyDrawOptions{Dir: out, Out: filepath.Join(dir, "b.gpkg"), Points: 200, Buffer: "3.5px", MinPerStratum: 30, Seed: 3})
	if err != nil || again.Strata[2].Pixels != res.Strata[2].Pixels {
		t.Errorf("35 m and 3.5 px buffers of 10 m pixels differ: %v %+v %+v", err, again, res)
	}
	pts, err := raster.ReadPoints(gpkg)
	if err != nil || len(pts.Points) != 200 || pts.Metadata[areasurvey.MdFingerprint] != res.Fingerprint {
		t.Fatalf("read back %v: %d points, metadata %v", err, len(pts.Points), pts.Metadata)
	}
	// The automated interpreter reads the truth at each point.
	tr, err := raster.Open([]string{f.Truth})
	if err != nil {
		t.Fatal(err)
	}
	truth, err := raster.ReadStrata(f.Truth, raster.Buffer{})
	tr.Close()
	if err != nil {
		t.Fatal(err)
	}
	gt := truth.GeoTransform
	for i := range pts.Points {
		p := &pts.Points[i]
		col, row := int((p.X-gt[0])/gt[1]), int((p.Y-gt[3])/gt[5])
		p.Reference = map[uint8]string{1: "change", 0: "no change", 255: ""}[truth.Codes[row*truth.Width+col]]
		if i == 0 {
			p.Reference = "" // one left unlabelled
		}
	}
	labelled := filepath.Join(dir, "labelled", "survey.gpkg")
	if err := raster.WritePoints(labelled, pts, false); err != nil {
		t.Fatal(err)
	}
	est, err := areasurvey.SurveyEstimate(t.Context(), jobtest.TestEnv, areasurvey.SurveyEstimateOptions{Dir: out, Survey: labelled})
	if err != nil {
		t.Fatal(err)
	}
	if est.Excluded < 1 || est.Labelled+est.Excluded != 200 || !strings.HasPrefix(est.Estimator, "Stehman") || len(est.Classes) != 2 || est.Classes[0].AreaCI95Ha == nil {
		t.Fatalf("estimate %+v", est)
	}
	c := est.Classes[0]
	t.Logf("change: mapped %.2f ha, estimated %.2f ± %.2f ha; overall accuracy %.3f ± %.3f", *c.MappedAreaHa, *c.AreaHa, *c.AreaSEHa, est.OverallAccuracy, est.OverallAccuracySE)
	html, err := os.ReadFile(filepath.Join(out, "report.html"))
	if err != nil || !strings.Contains(string(html), "Estimated area from the reference survey") || !strings.Contains(string(html), "screening result") {
		t.Errorf("report.html not updated: %v", err)
	}
	// The CSV gives the same estimate once labelled the same way.
	csvPath := filepath.Join(dir, "labelled", "survey.csv")
	os.WriteFile(csvPath, areasurvey.WriteSurveyCSV(pts), 0o666)
	fromCSV, err := areasurvey.SurveyEstimate(t.Context(), jobtest.TestEnv, areasurvey.SurveyEstimateOptions{Dir: out, Survey: csvPath, Overwrite: true})
	if err != nil || math.Abs(*fromCSV.Classes[0].AreaHa-*c.AreaHa) > 1e-9**c.AreaHa {
		t.Errorf("from the CSV: %v %+v", err, fromCSV)
	}
	// Bad input: a label outside the accepted values, another map, a
	// stratum entirely unlabelled, no reference column.
	bad := func(name string, edit func(string) string, want string) {
		p := filepath.Join(dir, name+".csv")
		os.WriteFile(p, []byte(edit(string(areasurvey.WriteSurveyCSV(pts)))), 0o666)
		_, err := areasurvey.SurveyEstimate(t.Context(), jobtest.TestEnv, areasurvey.SurveyEstimateOptions{Dir: out, Survey: p, Overwrite: true})
		jobtest.WantError(t, name, err, false, want)
	}
	bad("label", func(s string) string { return strings.Replace(s, ",no change\n", ",maybe\n", 1) }, "maybe")
	bad("fingerprint", func(s string) string { return strings.Replace(s, "sha256:", "sha256:00", 1) }, "another map")
	bad("unlabelled", func(s string) string {
		lines := strings.Split(s, "\n")
		for i, l := range lines {
			if strings.Contains(l, ",change,change,") {
				lines[i] = l[:strings.LastIndex(l, ",")+1]
			}
		}
		return strings.Join(lines, "\n")
	}, "no point of stratum")
	bad("noreference", func(s string) string { return strings.Replace(s, ",reference\n", ",notes\n", 1) }, "no reference field")
	_, err = areasurvey.SurveyDraw(t.Context(), jobtest.TestEnv, areasurvey.SurveyDrawOptions{Dir: out, Out: filepath.Join(dir, "c.gpkg"), Points: 1, Buffer: "0", MinPerStratum: 50})
	jobtest.WantError(t, "one point", err, true, "--points")
	_, err = areasurvey.SurveyDraw(t.Context(), jobtest.TestEnv, areasurvey.SurveyDrawOptions{Dir: out, Out: filepath.Join(dir, "c.gpkg"), Points: 1 << 30, Buffer: "0", MinPerStratum: 50})
	jobtest.WantError(t, "too many points", err, true, "pixels are available")
	jobtest.MustNotExist(t, "refused survey", filepath.Join(dir, "c.gpkg"))
}

// TestSurveyBufferInMetresNeedsCRS: a map without a CRS cannot measure a
// buffer in metres: one line naming the map, nothing written (known by
// construction: the map is written without a projection).
func TestSurveyBufferInMetresNeedsCRS(t *testing.T) {
	dir := t.TempDir()
	m := filepath.Join(dir, "map.tif")
	buf := make([]float64, 40*30)
	for i := 0; i < len(buf); i += 7 {
		buf[i] = 1
	}
	jobtest.WriteRasterFile(t, m, raster.Spec{Grid: raster.Grid{Width: 40, Height: 30}, Bands: 1, DataType: "Byte"}, buf)
	out := filepath.Join(dir, "survey.gpkg")
	_, err := areasurvey.SurveyDraw(t.Context(), jobtest.TestEnv, areasurvey.SurveyDrawOptions{Map: m, Out: out, Points: 120, Buffer: "30m", MinPerStratum: 10, Seed: 1})
	jobtest.WantError(t, "buffer in metres without CRS", err, true, m, "no CRS", "px")
	jobtest.MustNotExist(t, "buffer in metres without CRS", out)
	jobtest.NoTemporaries(t, dir)
}
