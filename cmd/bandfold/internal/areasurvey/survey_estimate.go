package areasurvey

import (
	"context"
	"encoding/json"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"slices"

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

// EstimateDoc heads estimate.json. Version 2 records every path relative
// to the estimate's folder (jobkit.DocPaths), where version 1 had them as
// typed.
var EstimateDoc = jobkit.Document{Format: "bandfold-survey-estimate", Version: 2}

// SurveyEstimateResult is estimate.json.
type SurveyEstimateResult struct {
	jobkit.Document
	// Paths is how the document records paths: relative to the folder of
	// estimate.json (Survey, Map, Outputs).
	Paths       jobkit.DocPaths `json:"-"`
	Survey      string          `json:"survey"`
	Map         string          `json:"map"`
	Fingerprint string          `json:"fingerprint"`
	Estimator   string          `json:"estimator"`
	// Drawn is the number of points the survey drew; Labelled and
	// Excluded (no label) count those in the file, Missing those absent
	// from it (MissingIDs), which count as not interpreted.
	Drawn             int             `json:"drawn"`
	Labelled          int             `json:"labelled"`
	Excluded          int             `json:"excluded"`
	Missing           int             `json:"missing"`
	MissingIDs        []int           `json:"missing_ids"`
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
// report.html in the change folder. The strata's areas and the points
// drawn in each come from the survey's metadata, written by the draw from
// the map (whose fingerprint the survey must match), never from the rows:
// rows the draw cannot have written are refused, and drawn points missing
// from the file are counted and named.
func SurveyEstimate(_ context.Context, env jobkit.Env, o SurveyEstimateOptions) (_ *SurveyEstimateResult, err error) {
	defer func() { err = jobkit.Classify(err) }()
	mapPath := mapOf(o.Dir, "")
	estPath := filepath.Join(filepath.Dir(o.Survey), "estimate.json")
	dir, folder := reportFolder(o.Dir, mapPath)
	if err := checkEstimateOutputs(o, mapPath, estPath, dir, folder); err != nil {
		return nil, err
	}
	s, err := readSurvey(o.Survey)
	if err != nil {
		return nil, err
	}
	fp, err := Fingerprint(mapPath)
	if err != nil {
		return nil, err
	}
	if got := s.pts.Metadata[MdFingerprint]; got != fp {
		return nil, fmt.Errorf("survey %s was drawn from another map than %s (fingerprint %q, the map's %s)", o.Survey, mapPath, got, fp)
	}
	res, err := estimate(s)
	if err != nil {
		return nil, err
	}
	if res.Missing > 0 {
		env.Warn("survey %s lacks %d of the %d points drawn (%s): they count as not interpreted", o.Survey, res.Missing, res.Drawn, idList(res.MissingIDs))
	}
	res.Paths = jobkit.DocPaths{Dir: filepath.Dir(estPath)}
	res.Survey, res.Map, res.Fingerprint, res.Caution = res.Paths.Input(o.Survey), res.Paths.Input(mapPath), fp, jobkit.Caution
	res.Outputs = res.Paths.Outputs(estPath)
	var report []byte
	if folder {
		section := estimateSection(res, jobkit.DocPaths{Dir: dir}.Input(o.Survey))
		if report, err = changefolder.FolderReport(dir, res.validArea(), &section); err != nil {
			return nil, err
		}
		res.Outputs = append(res.Outputs, res.Paths.Outputs(filepath.Join(dir, "report.html"))...)
	}
	js, err := json.MarshalIndent(res, "", "  ")
	if err != nil {
		return nil, fmt.Errorf("estimate from %s: a figure is not a finite number, so estimate.json cannot hold it", o.Survey)
	}
	if err := writeEstimate(estPath, append(js, '\n'), o.Overwrite, dir, report); err != nil {
		return nil, err
	}
	return res, nil
}

// reportFolder returns the change folder whose report an estimate updates:
// DIR when it is a folder holding summary.json.
func reportFolder(dir, mapPath string) (string, bool) {
	folder := filepath.Dir(mapPath)
	if _, err := os.Stat(filepath.Join(folder, "summary.json")); err == nil && mapPath != dir {
		return folder, true
	}
	return folder, false
}

// checkEstimateOutputs refuses, before any work, an estimate.json or
// report.html that is the survey, the map or the change summary the run
// reads, an estimate.json that cannot be written and a report that is not
// bandfold's to replace.
func checkEstimateOutputs(o SurveyEstimateOptions, mapPath, estPath, dir string, folder bool) error {
	ins := []output.Path{{Role: "survey", Path: o.Survey}, {Role: "map", Path: mapPath}}
	outs := []output.Path{{Role: "estimate", Path: estPath}}
	if folder {
		ins = append(ins, output.Path{Role: "change summary", Path: filepath.Join(dir, "summary.json")})
		outs = append(outs, output.Path{Role: "report", Path: filepath.Join(dir, "report.html")})
	}
	if err := output.Distinct(ins, outs); err != nil {
		return err
	}
	if err := checkOutputs(nil, outs[:1], o.Overwrite); err != nil {
		return err
	}
	if folder {
		return output.CheckReplace(dir, "report.html")
	}
	return nil
}

// writeEstimate writes estimate.json and, when report is set, replaces
// report.html in dir, so that a failure leaves neither changed: the
// estimate is committed last, and the old report put back if it fails.
func writeEstimate(estPath string, js []byte, overwrite bool, dir string, report []byte) error {
	f, err := output.Create(estPath, overwrite, "")
	if err != nil {
		return err
	}
	defer f.Abort()
	if err := os.WriteFile(f.Temp(), js, 0o666); err != nil {
		return fmt.Errorf("write %s: %w", estPath, err)
	}
	var old []byte
	if report != nil {
		old, _ = os.ReadFile(filepath.Join(dir, "report.html"))
		if err := output.Replace(dir, "report.html", report); err != nil {
			return err
		}
	}
	if err := f.Commit(); err != nil {
		if old != nil {
			output.Replace(dir, "report.html", old)
		}
		return err
	}
	return nil
}

// estimate applies the stratified estimator (Olofsson et al. 2014) when
// the strata are the map classes and Stehman's (2014) when a near-change
// stratum is present. The strata's areas are those the survey records.
func estimate(s *surveyFile) (*SurveyEstimateResult, error) {
	missing, err := s.checkRows()
	if err != nil {
		return nil, err
	}
	res := &SurveyEstimateResult{Document: EstimateDoc, Survey: s.path, MatrixClasses: surveyClasses, Drawn: s.drawn(), Missing: len(missing), MissingIDs: missing}
	labelled := make([]int, len(s.strata))
	var units []survey.Unit
	for i, p := range s.pts.Points {
		h := slices.IndexFunc(s.strata, func(st SurveyStratum) bool { return st.Name == p.Stratum })
		ref, ok := jobkit.Label(p.Reference)
		if !ok {
			return nil, fmt.Errorf("survey %s %s (point %d): reference %q: want change or no change (or 1 or 0), or empty", s.path, s.where[i], p.ID, p.Reference)
		}
		if ref < 0 {
			res.Excluded++
			continue
		}
		labelled[h]++
		units = append(units, survey.Unit{Stratum: h, Map: slices.Index(surveyClasses, p.MapClass), Ref: ref})
	}
	res.Labelled = len(units)
	areas := make([]float64, len(s.strata))
	mapped := make([]float64, len(surveyClasses))
	near := false
	for h, st := range s.strata {
		switch labelled[h] {
		case 0:
			return nil, fmt.Errorf("survey %s: no point of stratum %q is labelled (fill in the reference field)", s.path, st.Name)
		case 1:
			return nil, fmt.Errorf("survey %s: stratum %q has 1 labelled point: need at least 2", s.path, st.Name)
		}
		areas[h] = st.area()
		mapped[slices.Index(surveyClasses, st.MapClass)] += areas[h]
		near = near || st.Name == stratumNames[raster.StratumNearChange]
	}
	var e *survey.Estimate
	if near {
		res.Estimator = "Stehman (2014), strata different from the map classes"
		e, err = survey.Stehman(units, areas, len(surveyClasses))
	} else {
		res.Estimator = "stratified estimator, strata = map classes (Olofsson et al. 2014)"
		counts := [][]int{{0, 0}, {0, 0}}
		for _, u := range units {
			counts[u.Map][u.Ref]++
		}
		e, err = survey.Olofsson(counts, mapped)
	}
	if err != nil {
		return nil, fmt.Errorf("survey %s: %w", s.path, err)
	}
	res.fill(e, mapped, s.pts.Metadata[mdAreaUnit] != "px")
	return res, nil
}

// fill sets the accuracies and, on the ground, the areas of each class.
func (res *SurveyEstimateResult) fill(e *survey.Estimate, mapped []float64, ground bool) {
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
}

func finite(v float64) *float64 {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return nil
	}
	return &v
}

// estimateSection shows a survey's estimates, naming the survey file as
// survey (relative to the report's folder).
func estimateSection(e *SurveyEstimateResult, survey string) report.ReportSection {
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
		fmt.Sprintf("Survey %s: %d points drawn, %d labelled, %d without a label and %d missing from the file excluded. Estimator: %s.", survey, e.Drawn, e.Labelled, e.Excluded, e.Missing, e.Estimator),
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
