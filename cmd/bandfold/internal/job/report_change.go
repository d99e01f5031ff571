package job

import (
	"context"
	"path/filepath"

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
