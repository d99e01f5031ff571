package job

import (
	"context"
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"slices"
	"strings"

	"bandfold/raster/output"
)

// report writes report.html into the change folder: the caution, the
// dates and settings, the figures and the summary table.
func (r *changeRun) report(context.Context) error {
	images, err := folderImages(filepath.Dir(r.dir.Path("x")))
	if err != nil {
		return err
	}
	var validHa *float64
	if r.areas != nil {
		validHa = ptr(float64(r.sum.ValidPixels) * r.areas.Mean() / 1e4)
	}
	data, err := changeReport(r.sum, validHa, images, nil).render()
	if err != nil {
		return err
	}
	if err := output.WriteFile(r.dir.Path("report.html"), data, false); err != nil {
		return err
	}
	r.outputs = append(r.outputs, "report.html")
	return nil
}

type namedImage struct {
	name string
	data []byte
}

// folderImages reads the PNG figures of a change folder, by name.
func folderImages(dir string) ([]namedImage, error) {
	names, err := filepath.Glob(filepath.Join(dir, "*.png"))
	if err != nil {
		return nil, err
	}
	slices.Sort(names)
	var out []namedImage
	for _, n := range names {
		data, err := os.ReadFile(n)
		if err != nil {
			return nil, fmt.Errorf("report: %w", err)
		}
		out = append(out, namedImage{filepath.Base(n), data})
	}
	return out, nil
}

// folderReport renders the report of a committed change folder with a
// survey's estimate.
func folderReport(dir string, est *SurveyEstimateResult) ([]byte, error) {
	raw, err := os.ReadFile(filepath.Join(dir, "summary.json"))
	if err != nil {
		return nil, fmt.Errorf("report in %s: %w", dir, err)
	}
	var sum ChangeResult
	if err := json.Unmarshal(raw, &sum); err != nil {
		return nil, fmt.Errorf("report in %s: summary.json: %w", dir, err)
	}
	images, err := folderImages(dir)
	if err != nil {
		return nil, err
	}
	var validHa *float64
	if est != nil && len(est.Classes) == 2 && est.Classes[0].MappedAreaHa != nil {
		validHa = ptr(*est.Classes[0].MappedAreaHa + *est.Classes[1].MappedAreaHa)
	}
	return changeReport(&sum, validHa, images, est).render()
}

// changeReport lays out the report of a change run, with a survey's
// estimate when est is set.
func changeReport(s *ChangeResult, validHa *float64, images []namedImage, est *SurveyEstimateResult) *report {
	rep := &report{Title: "Change between " + s.BeforeLabel + " and " + s.AfterLabel, Caution: Caution,
		Subtitle: fmt.Sprintf("before: %s; after: %s", s.Before, s.After)}
	settings := reportSection{Heading: "Dates and settings", Facts: [][2]string{
		{"before", s.BeforeLabel + " (" + s.Before + ")"}, {"after", s.AfterLabel + " (" + s.After + ")"},
		{"threshold", fmt.Sprintf("%s, Z = %.4g", s.Threshold.Rule, s.Threshold.Z)},
		{"components", fmt.Sprint(s.Components)}, {"basis", s.Basis},
		{"minimum mapping unit", fmt.Sprintf("%d px", s.MinAreaPixels)}, {"aligned", fmt.Sprint(s.Aligned)},
	}}
	model := fmt.Sprintf("%d iterations on %d sampled pixels (converged: %v)", s.Iterations, s.SamplePixels, s.Converged)
	if s.Identical {
		model = "none: the dates are identical"
	}
	summary := reportTable{Caption: "Summary", Head: []string{"quantity", "value"}, Rows: [][]string{
		{"valid pixels", fmt.Sprint(s.ValidPixels)}, {"valid area (ha)", num(validHa, 2)},
		{"changed pixels", fmt.Sprintf("%d (%.4f of valid)", s.ChangedPixels, s.ChangedFrac)},
		{"mapped area of change (ha)", num(s.ChangedAreaHa, 2)}, {"change patches", fmt.Sprint(s.Patches)},
		{"threshold", fmt.Sprintf("%s (Z = %.4g)", s.Threshold.Rule, s.Threshold.Z)}, {"no-change model", model},
	}}
	results := reportSection{Heading: "Mapped change", Notes: []string{s.AreaNote}, Tables: []reportTable{summary}}
	for _, im := range images {
		results.Figures = append(results.Figures, pngFigure(figureCaption(im.name), im.data))
	}
	rep.Sections = []reportSection{settings, results}
	if a := s.Reference; a != nil {
		rep.Sections = append(rep.Sections, reportSection{Heading: "Accuracy against " + a.File, Tables: []reportTable{{
			Caption: "Pixel agreement with the reference", Head: []string{"measure", "value"},
			Rows: [][]string{{"recall", num(a.Recall, 3)}, {"precision", num(a.Precision, 3)}, {"F1", num(a.F1, 3)},
				{"overall accuracy", num(a.OverallAccuracy, 4)}, {"false-alarm rate", num(a.FalseAlarmRate, 4)},
				{"confusion (TP, FP, FN, TN)", fmt.Sprintf("%d, %d, %d, %d", a.TruePositive, a.FalsePositive, a.FalseNegative, a.TrueNegative)}},
		}}})
	}
	if est != nil {
		rep.Sections = append(rep.Sections, estimateSection(est))
	} else {
		rep.Sections = append(rep.Sections, reportSection{Heading: "Estimated area", Notes: []string{
			"No survey yet. Draw a reference sample with bandfold survey draw, label it from better reference data, then run bandfold survey estimate to add area estimates with confidence intervals here."}})
	}
	return rep
}

// figureCaption describes a figure of the change folder by its file name.
func figureCaption(name string) string {
	if name == "preview.png" {
		return "preview.png: the after date with the mapped change outlined"
	}
	return strings.TrimSuffix(name, ".png")
}

// estimateSection shows a survey's estimates.
func estimateSection(e *SurveyEstimateResult) reportSection {
	areas := reportTable{Caption: "Estimated area (95% confidence interval) beside the mapped area",
		Head: []string{"class", "mapped area (ha)", "estimated area (ha)", "standard error (ha)", "95% interval (ha)", "user's accuracy", "producer's accuracy"}}
	for _, c := range e.Classes {
		ci := "n/a"
		if c.AreaCI95Ha != nil {
			ci = fmt.Sprintf("%.2f to %.2f", c.AreaCI95Ha[0], c.AreaCI95Ha[1])
		}
		areas.Rows = append(areas.Rows, []string{c.Class, num(c.MappedAreaHa, 2), num(c.AreaHa, 2), num(c.AreaSEHa, 2), ci,
			num(c.UsersAccuracy, 3) + " ± " + num(c.UsersAccuracySE, 3), num(c.ProducersAccuracy, 3) + " ± " + num(c.ProducersAccuracySE, 3)})
	}
	matrix := reportTable{Caption: "Estimated error matrix in area proportions (rows: map class, columns: reference class)", Head: append([]string{"map \\ reference"}, e.MatrixClasses...)}
	for i, row := range e.ErrorMatrix {
		cells := []string{e.MatrixClasses[i]}
		for _, v := range row {
			cells = append(cells, fmt.Sprintf("%.4f", v))
		}
		matrix.Rows = append(matrix.Rows, cells)
	}
	return reportSection{Heading: "Estimated area from the reference survey", Notes: []string{
		fmt.Sprintf("Survey %s: %d labelled points, %d without a label excluded. Estimator: %s.", e.Survey, e.Labelled, e.Excluded, e.Estimator),
		fmt.Sprintf("Overall accuracy %.3f ± %.3f (standard error).", e.OverallAccuracy, e.OverallAccuracySE),
	}, Tables: []reportTable{areas, matrix}}
}
