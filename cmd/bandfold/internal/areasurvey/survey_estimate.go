package areasurvey

import (
	"context"
	"encoding/json"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strings"

	"bandfold/cmd/bandfold/internal/changefolder"
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/report"
	"bandfold/raster"
	"bandfold/raster/output"
	"bandfold/transform/survey"
)

// SurveyEstimateOptions are the options of SurveyEstimate.
type SurveyEstimateOptions struct {
	// Dir is the change output folder (or the map file) the survey was
	// drawn from; Survey the labelled survey.gpkg or survey.csv.
	Dir, Survey string
	Overwrite   bool
}

// ClassEstimate is the estimate of one class.
type ClassEstimate struct {
	Class               string      `json:"class"`
	MappedAreaHa        *float64    `json:"mapped_area_ha"`
	AreaHa              *float64    `json:"area_ha"`
	AreaSEHa            *float64    `json:"area_se_ha"`
	AreaCI95Ha          *[2]float64 `json:"area_ci95_ha"`
	MappedAreaM2        *float64    `json:"mapped_area_m2"`
	AreaM2              *float64    `json:"area_m2"`
	AreaSEM2            *float64    `json:"area_se_m2"`
	AreaCI95M2          *[2]float64 `json:"area_ci95_m2"`
	AreaFraction        float64     `json:"area_fraction"`
	AreaFractionSE      float64     `json:"area_fraction_se"`
	UsersAccuracy       *float64    `json:"users_accuracy"`
	UsersAccuracySE     *float64    `json:"users_accuracy_se"`
	ProducersAccuracy   *float64    `json:"producers_accuracy"`
	ProducersAccuracySE *float64    `json:"producers_accuracy_se"`
}

// SurveyEstimateResult is estimate.json.
type SurveyEstimateResult struct {
	Survey            string          `json:"survey"`
	Map               string          `json:"map"`
	Fingerprint       string          `json:"fingerprint"`
	Estimator         string          `json:"estimator"`
	Labelled          int             `json:"labelled"`
	Excluded          int             `json:"excluded"`
	OverallAccuracy   float64         `json:"overall_accuracy"`
	OverallAccuracySE float64         `json:"overall_accuracy_se"`
	MatrixClasses     []string        `json:"error_matrix_classes"`
	ErrorMatrix       [][]float64     `json:"error_matrix"`
	Classes           []ClassEstimate `json:"classes"`
	Outputs           []string        `json:"outputs"`
	Caution           string          `json:"caution"`
}

// SurveyEstimate reads an interpreted survey and estimates the area of
// change and no change and the map's accuracy, with standard errors and
// 95% intervals; it writes estimate.json beside the survey and updates
// report.html in the change folder.
func SurveyEstimate(_ context.Context, _ jobkit.Env, o SurveyEstimateOptions) (_ *SurveyEstimateResult, err error) {
	defer func() { err = jobkit.Classify(err) }()
	mapPath := mapOf(o.Dir, "")
	estPath := filepath.Join(filepath.Dir(o.Survey), "estimate.json")
	if err := output.Distinct([]output.Path{{Role: "survey", Path: o.Survey}, {Role: "map", Path: mapPath}}, []output.Path{{Role: "estimate", Path: estPath}}); err != nil {
		return nil, err
	}
	if err := output.Check(estPath, o.Overwrite); err != nil {
		return nil, err
	}
	var pts *raster.Points
	if strings.EqualFold(filepath.Ext(o.Survey), ".csv") {
		pts, err = readSurveyCSV(o.Survey)
	} else {
		pts, err = raster.ReadPoints(o.Survey)
	}
	if err != nil {
		return nil, err
	}
	fp, err := Fingerprint(mapPath)
	if err != nil {
		return nil, err
	}
	if got := pts.Metadata[MdFingerprint]; got != fp {
		return nil, fmt.Errorf("survey %s was drawn from another map than %s (fingerprint %q, the map's %s)", o.Survey, mapPath, got, fp)
	}
	res, err := estimate(o.Survey, pts)
	if err != nil {
		return nil, err
	}
	res.Map, res.Fingerprint, res.Caution = mapPath, fp, jobkit.Caution
	res.Outputs = []string{estPath}
	var report []byte
	dir := filepath.Dir(mapPath)
	if _, err := os.Stat(filepath.Join(dir, "summary.json")); err == nil && mapOf(o.Dir, "") != o.Dir {
		section := estimateSection(res)
		if report, err = changefolder.FolderReport(dir, res.validArea(), &section); err != nil {
			return nil, err
		}
		res.Outputs = append(res.Outputs, filepath.Join(dir, "report.html"))
	}
	js, err := json.MarshalIndent(res, "", "  ")
	if err != nil {
		return nil, err
	}
	if err := output.WriteFile(estPath, append(js, '\n'), o.Overwrite); err != nil {
		return nil, err
	}
	if report != nil {
		if err := output.Replace(dir, "report.html", report); err != nil {
			return nil, err
		}
	}
	return res, nil
}

// estimate applies the stratified estimator (Olofsson et al. 2014) when
// the strata are the map classes and Stehman's (2014) when a near-change
// stratum is present.
func estimate(path string, pts *raster.Points) (*SurveyEstimateResult, error) {
	res := &SurveyEstimateResult{Survey: path, MatrixClasses: surveyClasses}
	area := make([]float64, len(stratumNames))
	labelled := make([]int, len(stratumNames))
	seen := make([]bool, len(stratumNames))
	var units []survey.Unit
	for _, p := range pts.Points {
		h := slices.Index(stratumNames, p.Stratum)
		m := slices.Index(surveyClasses, p.MapClass)
		if h < 0 || m < 0 || stratumClass[h] != p.MapClass {
			return nil, fmt.Errorf("survey %s: point %d has stratum %q and map class %q, which no survey draws", path, p.ID, p.Stratum, p.MapClass)
		}
		ref, ok := jobkit.Label(p.Reference)
		if !ok {
			return nil, fmt.Errorf("survey %s: point %d has reference %q: want change or no change (or 1 or 0), or empty", path, p.ID, p.Reference)
		}
		area[h] += p.Weight
		seen[h] = true
		if ref < 0 {
			res.Excluded++
			continue
		}
		labelled[h]++
		units = append(units, survey.Unit{Stratum: h, Map: m, Ref: ref})
	}
	res.Labelled = len(units)
	var strata []float64
	remap := make([]int, len(stratumNames))
	for h := range stratumNames {
		if !seen[h] {
			continue
		}
		if labelled[h] == 0 {
			return nil, fmt.Errorf("survey %s: no point of stratum %q is labelled (fill in the reference field)", path, stratumNames[h])
		}
		if labelled[h] < 2 {
			return nil, fmt.Errorf("survey %s: stratum %q has %d labelled point: need at least 2", path, stratumNames[h], labelled[h])
		}
		remap[h] = len(strata)
		strata = append(strata, area[h])
	}
	for i := range units {
		units[i].Stratum = remap[units[i].Stratum]
	}
	var e *survey.Estimate
	var err error
	if seen[raster.StratumNearChange] {
		res.Estimator = "Stehman (2014), strata different from the map classes"
		e, err = survey.Stehman(units, strata, len(surveyClasses))
	} else {
		res.Estimator = "stratified estimator, strata = map classes (Olofsson et al. 2014)"
		counts := [][]int{{0, 0}, {0, 0}}
		mapped := make([]float64, 2)
		for _, u := range units {
			counts[u.Map][u.Ref]++
		}
		for h := range stratumNames {
			if seen[h] {
				mapped[slices.Index(surveyClasses, stratumClass[h])] += area[h]
			}
		}
		e, err = survey.Olofsson(counts, mapped)
	}
	if err != nil {
		return nil, fmt.Errorf("survey %s: %w", path, err)
	}
	ground := pts.Metadata[mdAreaUnit] != "px"
	mapped := make([]float64, 2)
	for h := range stratumNames {
		if seen[h] {
			mapped[slices.Index(surveyClasses, stratumClass[h])] += area[h]
		}
	}
	res.OverallAccuracy, res.OverallAccuracySE, res.ErrorMatrix = e.Overall, e.OverallSE, e.ErrorMatrix
	for k, name := range surveyClasses {
		c := ClassEstimate{Class: name, AreaFraction: e.Area[k], AreaFractionSE: e.AreaSE[k],
			UsersAccuracy: finite(e.Users[k]), UsersAccuracySE: finite(e.UsersSE[k]), ProducersAccuracy: finite(e.Producers[k]), ProducersAccuracySE: finite(e.ProducersSE[k])}
		if ground {
			a, se := e.Area[k]*e.Total, e.AreaSE[k]*e.Total
			lo, hi := survey.CI95(a, se)
			c.MappedAreaM2, c.AreaM2, c.AreaSEM2, c.AreaCI95M2 = jobkit.Ptr(mapped[k]), jobkit.Ptr(a), jobkit.Ptr(se), &[2]float64{lo, hi}
			c.MappedAreaHa, c.AreaHa, c.AreaSEHa, c.AreaCI95Ha = jobkit.Ptr(mapped[k]/1e4), jobkit.Ptr(a/1e4), jobkit.Ptr(se/1e4), &[2]float64{lo / 1e4, hi / 1e4}
		}
		res.Classes = append(res.Classes, c)
	}
	return res, nil
}

func finite(v float64) *float64 {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return nil
	}
	return &v
}

// estimateSection shows a survey's estimates.
func estimateSection(e *SurveyEstimateResult) report.ReportSection {
	areas := report.ReportTable{Caption: "Estimated area (95% confidence interval) beside the mapped area",
		Head: []string{"class", "mapped area (ha)", "estimated area (ha)", "standard error (ha)", "95% interval (ha)", "user's accuracy", "producer's accuracy"}}
	for _, c := range e.Classes {
		ci := "n/a"
		if c.AreaCI95Ha != nil {
			ci = fmt.Sprintf("%.2f to %.2f", c.AreaCI95Ha[0], c.AreaCI95Ha[1])
		}
		areas.Rows = append(areas.Rows, []string{c.Class, report.Num(c.MappedAreaHa, 2), report.Num(c.AreaHa, 2), report.Num(c.AreaSEHa, 2), ci,
			report.Num(c.UsersAccuracy, 3) + " ± " + report.Num(c.UsersAccuracySE, 3), report.Num(c.ProducersAccuracy, 3) + " ± " + report.Num(c.ProducersAccuracySE, 3)})
	}
	matrix := report.ReportTable{Caption: "Estimated error matrix in area proportions (rows: map class, columns: reference class)", Head: append([]string{"map \\ reference"}, e.MatrixClasses...)}
	for i, row := range e.ErrorMatrix {
		cells := []string{e.MatrixClasses[i]}
		for _, v := range row {
			cells = append(cells, fmt.Sprintf("%.4f", v))
		}
		matrix.Rows = append(matrix.Rows, cells)
	}
	return report.ReportSection{Heading: "Estimated area from the reference survey", Notes: []string{
		fmt.Sprintf("Survey %s: %d labelled points, %d without a label excluded. Estimator: %s.", e.Survey, e.Labelled, e.Excluded, e.Estimator),
		fmt.Sprintf("Overall accuracy %.3f ± %.3f (standard error).", e.OverallAccuracy, e.OverallAccuracySE),
	}, Tables: []report.ReportTable{areas, matrix}}
}

// validArea is the mapped area of both classes of a change map's survey,
// nil otherwise.
func (e *SurveyEstimateResult) validArea() *float64 {
	if len(e.Classes) != 2 || e.Classes[0].MappedAreaHa == nil || e.Classes[1].MappedAreaHa == nil {
		return nil
	}
	return jobkit.Ptr(*e.Classes[0].MappedAreaHa + *e.Classes[1].MappedAreaHa)
}
