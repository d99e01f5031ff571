package pairchange

import (
	"context"
	"path/filepath"

	"bandfold/cmd/bandfold/internal/changefolder"
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/report"
	"bandfold/raster/output"
)

// report writes report.html into the change folder: the caution, the
// dates and settings, the figures and the summary table.
func (r *changeRun) report(context.Context) error {
	images, err := report.FolderImages(filepath.Dir(r.Dir.Path("x")))
	if err != nil {
		return err
	}
	var validHa *float64
	if r.Areas != nil {
		validHa = jobkit.Ptr(float64(r.sum.ValidPixels) * r.Areas.Mean() / 1e4)
	}
	data, err := changefolder.ChangeReport(r.sum, validHa, images, nil).Render()
	if err != nil {
		return err
	}
	if err := output.WriteFile(r.Dir.Path("report.html"), data, false); err != nil {
		return err
	}
	r.outputs = append(r.outputs, "report.html")
	return nil
}
