package changefolder

import (
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/report"
	"bandfold/cmd/bandfold/internal/series"
	"bandfold/transform/change"
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"strings"
)

// SummaryDoc heads summary.json. Version 2 records every path relative to
// the change folder (jobkit.DocPaths), where version 1 had the inputs as
// typed and the outputs from the working directory.
var SummaryDoc = jobkit.Document{Format: "bandfold-change-summary", Version: 2}

// ChangeResult is summary.json ("format": "bandfold-change-summary").
type ChangeResult struct {
	jobkit.Document
	// FolderSummary is what the summary says of the run as a whole
	// (paths relative to the change folder; changed pixels are those
	// flagged after the minimum mapping unit).
	series.FolderSummary
	// Before, After and Reference.File are relative to the change folder;
	// URLs and /vsi paths as given.
	Before string `json:"before"`
	After  string `json:"after"`
	// BeforeLabel and AfterLabel name the dates' stacks for people.
	BeforeLabel string  `json:"before_label"`
	AfterLabel  string  `json:"after_label"`
	ChangedFrac float64 `json:"changed_fraction"`
	// ValidAreaM2 and ValidAreaHa are the ground area of the pixels valid
	// on both dates; null without a CRS.
	ValidAreaM2 *float64                `json:"valid_area_m2"`
	ValidAreaHa *float64                `json:"valid_area_ha"`
	Threshold   series.ThresholdSummary `json:"threshold"`
	Location    []float64               `json:"location"`
	Covariance  [][]float64             `json:"covariance"`
	Iterations  int                     `json:"iterations"`
	Converged   bool                    `json:"converged"`
	// Identical is set when the dates do not differ at all over the valid
	// pixels: no change is mapped and no model is fitted.
	Identical    bool `json:"identical"`
	SamplePixels int  `json:"sample_pixels"`
	// BeforeDate and AfterDate are the dates' dates and where each came
	// from.
	BeforeDate    string                      `json:"before_date"`
	AfterDate     string                      `json:"after_date"`
	DateSource    []string                    `json:"date_sources"`
	Reference     *ChangeAccuracy             `json:"reference,omitempty"`
	Normalization series.NormalizationSummary `json:"normalization"`
}

// ChangeAccuracy compares the map with reference data over the pixels valid
// in both; undefined rates are null.
type ChangeAccuracy struct {
	File string `json:"file"`
	change.Confusion
	change.Rates
}

// FolderReport renders the report of a committed change folder with a
// survey's estimate: its section and the valid area it states.
func FolderReport(dir string, validHa *float64, estimate *report.ReportSection) ([]byte, error) {
	raw, err := os.ReadFile(filepath.Join(dir, "summary.json"))
	if err != nil {
		return nil, fmt.Errorf("report in %s: %w", dir, err)
	}
	var sum ChangeResult
	if err := json.Unmarshal(raw, &sum); err != nil {
		return nil, fmt.Errorf("report in %s: summary.json: %w", dir, err)
	}
	images, err := report.FolderImages(dir)
	if err != nil {
		return nil, err
	}
	return ChangeReport(&sum, validHa, images, estimate).Render()
}

// ChangeReport lays out the report of a change run, with the section of a
// survey's estimate when estimate is set.
func ChangeReport(s *ChangeResult, validHa *float64, images []report.NamedImage, estimate *report.ReportSection) *report.Report {
	rep := &report.Report{Title: "Change between " + s.BeforeLabel + " and " + s.AfterLabel, Caution: jobkit.Caution,
		Subtitle: fmt.Sprintf("before: %s; after: %s", s.Before, s.After)}
	settings := report.ReportSection{Heading: "Dates and settings", Facts: [][2]string{
		{"before", s.BeforeLabel + " (" + s.Before + ")"}, {"after", s.AfterLabel + " (" + s.After + ")"},
		{"threshold", fmt.Sprintf("%s, Z = %.4g", s.Threshold.Rule, s.Threshold.Z)},
		{"components", fmt.Sprint(s.Components)}, {"basis", s.Basis},
		{"minimum mapping unit", fmt.Sprintf("%d px", s.MinAreaPixels)}, {"aligned", fmt.Sprint(s.Aligned)},
	}}
	model := fmt.Sprintf("%d iterations on %d sampled pixels (converged: %v)", s.Iterations, s.SamplePixels, s.Converged)
	if s.Identical {
		model = "none: the dates are identical"
	}
	summary := report.ReportTable{Caption: "Summary", Head: []string{"quantity", "value"}, Rows: [][]string{
		{"valid pixels", fmt.Sprint(s.ValidPixels)}, {"valid area (ha)", report.Num(validHa, 2)},
		{"changed pixels", fmt.Sprintf("%d (%.4f of valid)", s.ChangedPixels, s.ChangedFrac)},
		{"mapped area of change (ha)", report.Num(s.ChangedAreaHa, 2)}, {"change patches", fmt.Sprint(s.Patches)},
		{"threshold", fmt.Sprintf("%s (Z = %.4g)", s.Threshold.Rule, s.Threshold.Z)}, {"no-change model", model},
	}}
	results := report.ReportSection{Heading: "Mapped change", Notes: []string{s.AreaNote}, Tables: []report.ReportTable{summary}}
	for _, im := range images {
		results.Figures = append(results.Figures, report.PngFigure(figureCaption(im.Name), im.Data))
	}
	rep.Sections = []report.ReportSection{settings, results}
	if a := s.Reference; a != nil {
		rep.Sections = append(rep.Sections, report.ReportSection{Heading: "Accuracy against " + a.File, Tables: []report.ReportTable{{
			Caption: "Pixel agreement with the reference", Head: []string{"measure", "value"},
			Rows: [][]string{{"recall", report.Num(a.Recall, 3)}, {"precision", report.Num(a.Precision, 3)}, {"F1", report.Num(a.F1, 3)},
				{"overall accuracy", report.Num(a.OverallAccuracy, 4)}, {"false-alarm rate", report.Num(a.FalseAlarmRate, 4)},
				{"confusion (TP, FP, FN, TN)", fmt.Sprintf("%d, %d, %d, %d", a.TruePositive, a.FalsePositive, a.FalseNegative, a.TrueNegative)}},
		}}})
	}
	if estimate != nil {
		rep.Sections = append(rep.Sections, *estimate)
	} else {
		rep.Sections = append(rep.Sections, report.ReportSection{Heading: "Estimated area", Notes: []string{
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
