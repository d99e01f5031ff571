package timeline

import (
	"bytes"
	"context"
	"fmt"
	"image"
	"image/draw"
	"image/png"
	"math"
	"path/filepath"
	"slices"

	"bandfold/cmd/bandfold/internal/figures"
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/report"
	"bandfold/cmd/bandfold/internal/series"
	"bandfold/raster/output"
)

// figures writes timeline.png (mapped change per step) and first-change.png
// (the date of the first lasting change).
func (r *timelineRun) figures(context.Context) error {
	S := r.steps()
	d := figures.TimelineData{Unit: "pixels", Title: "Mapped change per step: lasting, and flagged but did not last"}
	for q := range S {
		c := r.counts[q]
		d.Steps = append(d.Steps, r.label(q+1))
		if r.Areas != nil {
			d.Unit = "ha"
			d.Lasting, d.Passing = append(d.Lasting, c.confirmedArea/1e4), append(d.Passing, (c.flaggedArea-c.confirmedArea)/1e4)
		} else {
			d.Lasting, d.Passing = append(d.Lasting, float64(c.confirmed)), append(d.Passing, float64(c.flagged-c.confirmed))
		}
	}
	bars, err := figures.TimelineBars(d)
	if err != nil {
		return fmt.Errorf("timeline of %s: %w", r.o.Out, err)
	}
	// The caution travels with the chart too, under it.
	decoded, err := png.Decode(bytes.NewReader(bars))
	if err != nil {
		return fmt.Errorf("timeline of %s: %w", r.o.Out, err)
	}
	chart := image.NewRGBA(decoded.Bounds())
	draw.Draw(chart, chart.Bounds(), decoded, decoded.Bounds().Min, draw.Src)
	lines := []string{jobkit.Caution}
	if v, ok := r.Scenes[0].Metadata["SCENARIO"]; ok {
		lines = append(lines, "invented scenario: "+v)
	}
	if bars, err = report.EncodePNG(figures.Annotate(chart, figures.Annotation{Lines: lines})); err != nil {
		return fmt.Errorf("timeline of %s: %w", r.o.Out, err)
	}
	if err := output.WriteFile(r.Dir.Path("timeline.png"), bars, false); err != nil {
		return err
	}
	var labels []string
	for q := range S {
		labels = append(labels, "first lasting change between "+r.label(q)+" and "+r.label(q+1))
	}
	img := figures.DateMap(r.pw, r.ph, r.firstPrev, figures.DateColours(S), labels)
	ann := figures.Annotation{Title: fmt.Sprintf("Date of first lasting change, %s to %s", r.label(0), r.label(S)), Lines: lines}
	if r.Areas != nil {
		gt := r.Scenes[0].GeoTransform
		ann.MetresPerPixel = math.Sqrt(r.Areas.Mean()) * float64(r.Scenes[0].Width) / float64(r.pw)
		ann.NorthArrow = gt[2] == 0 && gt[4] == 0
	}
	data, err := report.EncodePNG(figures.Annotate(img, ann))
	if err != nil {
		return fmt.Errorf("first-change quicklook of %s: %w", r.o.Out, err)
	}
	if err := output.WriteFile(r.Dir.Path("first-change.png"), data, false); err != nil {
		return err
	}
	r.outputs = append(r.outputs, "timeline.png", "first-change.png")
	return nil
}

// SummaryDoc heads timeline.json. Version 2 records every path relative to
// the timeline folder (jobkit.DocPaths), where version 1 had the scenes as
// typed and the outputs from the working directory, and names the flags
// that last lasting_* (version 1: confirmed_*), as --confirm lasting and
// steps.tif do.
var SummaryDoc = jobkit.Document{Format: "bandfold-timeline-summary", Version: 2}

// result fills timeline.json's content.
func (r *timelineRun) result() {
	s := &TimelineResult{Document: SummaryDoc, Threshold: r.o.Threshold.String(), Normalize: r.o.Normalize, Confirm: r.o.Confirm, ReferenceDate: r.Dates[r.Ref].Label,
		FolderSummary: r.FolderSummary("mapped areas (pixels flagged after the minimum mapping unit), not estimates of the true area of change")}
	s.ValidPixels, s.ChangedPixels = r.totalValid, r.totalChanged
	s.SetChangedArea(r.Run, r.changedArea)
	paths := s.Paths
	for i := range r.Scenes {
		s.Scenes = append(s.Scenes, TimelineScene{Path: paths.Input(r.Args[i]), Label: r.LabelIn(i), Date: r.label(i), DateSource: r.Dates[i].Source, Normalization: r.NormSums[i]})
	}
	k := r.Proj.Components()
	ha := func(m2 float64) (*float64, *float64) {
		if r.Areas == nil {
			return nil, nil
		}
		return jobkit.Ptr(m2), jobkit.Ptr(m2 / 1e4)
	}
	for q := range r.steps() {
		f, c := r.Fits[q], r.counts[q]
		st := TimelineStep{Step: q + 1, From: r.label(q), To: r.label(q + 1), Components: k, Identical: f.Identical,
			Threshold:   series.ThresholdSummary{Rule: r.o.Threshold.String(), Z: f.Zcut, Median: series.ChisqMedian(k), Separability: f.Eta},
			Confirmable: q < r.steps()-1 || r.o.Confirm == ConfirmNone, ValidPixels: r.valid[q],
			FlaggedPixels: c.flagged, LastingPixels: c.confirmed, Patches: c.patches, Location: []float64{}, Covariance: [][]float64{}, Converged: true}
		st.FlaggedAreaM2, st.FlaggedAreaHa = ha(c.flaggedArea)
		st.LastingAreaM2, st.LastingAreaHa = ha(c.confirmedArea)
		if m := f.Model; m != nil {
			st.Location, st.Iterations, st.Converged, st.SamplePixels = m.Location, m.Iterations, m.Converged, m.Sample
			for i := range k {
				row := make([]float64, k)
				for j := range k {
					row[j] = m.Covariance.At(i, j)
				}
				st.Covariance = append(st.Covariance, row)
			}
		}
		s.Steps = append(s.Steps, st)
		s.Patches += c.patches
	}
	r.sum = s
}

// report writes report.html in the form of change's report.
func (r *timelineRun) report(context.Context) error {
	r.result()
	images, err := report.FolderImages(filepath.Dir(r.Dir.Path("x")))
	if err != nil {
		return err
	}
	data, err := timelineReport(r.sum, images).Render()
	if err != nil {
		return err
	}
	if err := output.WriteFile(r.Dir.Path("report.html"), data, false); err != nil {
		return err
	}
	r.outputs = append(r.outputs, "report.html")
	return nil
}

// timelineReport lays out the report of a timeline run.
func timelineReport(s *TimelineResult, images []report.NamedImage) *report.Report {
	n := len(s.Scenes)
	rep := &report.Report{Title: "Timeline of change, " + s.Scenes[0].Date + " to " + s.Scenes[n-1].Date, Caution: jobkit.Caution,
		Subtitle: fmt.Sprintf("%d dates, %d steps", n, len(s.Steps))}
	settings := report.ReportSection{Heading: "Dates and settings"}
	for _, sc := range s.Scenes {
		settings.Facts = append(settings.Facts, [2]string{sc.Date, sc.Label + " (" + sc.Path + "; date from " + sc.DateSource + ")"})
	}
	settings.Facts = append(settings.Facts, [2]string{"threshold", s.Threshold}, [2]string{"components", fmt.Sprint(s.Components)},
		[2]string{"basis", s.Basis}, [2]string{"minimum mapping unit", fmt.Sprintf("%d px", s.MinAreaPixels)},
		[2]string{"normalisation", s.Normalize}, [2]string{"confirmation", s.Confirm}, [2]string{"aligned", fmt.Sprint(s.Aligned)})
	steps := report.ReportTable{Caption: "Steps", Head: []string{"step", "dates", "Z threshold", "flagged pixels", "lasting pixels", "lasting area (ha)", "patches", "confirmable"}}
	for _, st := range s.Steps {
		steps.Rows = append(steps.Rows, []string{fmt.Sprint(st.Step), st.From + " to " + st.To, fmt.Sprintf("%.4g", st.Threshold.Z),
			fmt.Sprint(st.FlaggedPixels), fmt.Sprint(st.LastingPixels), report.Num(st.LastingAreaHa, 2), fmt.Sprint(st.Patches), fmt.Sprint(st.Confirmable)})
	}
	results := report.ReportSection{Heading: "Mapped change", Notes: append([]string{s.AreaNote}, s.Warnings...), Tables: []report.ReportTable{steps}}
	for _, im := range images {
		results.Figures = append(results.Figures, report.PngFigure(im.Name, im.Data))
	}
	rep.Sections = []report.ReportSection{settings, results}
	return rep
}

// item writes item.json, the folder's STAC Item: the first and last dates,
// the footprint, every output with its bands, and the caution.
func (r *timelineRun) item(context.Context) error {
	last := len(r.Dates) - 1
	desc := fmt.Sprintf("bandfold timeline of %d dates, %s to %s. %s", len(r.Dates), r.Dates[0].Label, r.Dates[last].Label, jobkit.Caution)
	files := append(slices.Clone(r.outputs), "timeline.json")
	if err := jobkit.FolderItem(r.Dir, files, r.Scenes[0].Grid, r.Dates[0].Time, r.Dates[last].Time, desc); err != nil {
		return err
	}
	r.outputs = append(r.outputs, "item.json")
	return nil
}

// summary writes timeline.json and moves the folder into place.
func (r *timelineRun) summary(context.Context) error {
	r.outputs = append(r.outputs, "timeline.json")
	r.sum.Outputs = r.sum.Paths.Entries(r.outputs)
	return jobkit.CommitSummary(r.Env, r.Dir, "timeline.json", r.sum, r.Warnings)
}
