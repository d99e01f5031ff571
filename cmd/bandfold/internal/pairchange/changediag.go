package pairchange

import (
	"bandfold/cmd/bandfold/internal/figures"
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/series"
	"bandfold/raster/output"
	"context"
	"fmt"
)

// thresholdSummary is the threshold for the summary.
func (r *changeRun) thresholdSummary() series.ThresholdSummary {
	return series.ThresholdSummary{Rule: r.o.Threshold.String(), Z: r.zcut, Median: series.ChisqMedian(r.Proj.Components()), Separability: r.eta}
}

// diagnostics writes diagnostics.png: the histogram of Z over the sample
// against the chi-square density with k degrees of freedom, the threshold
// marked, and a QQ panel.
func (r *changeRun) diagnostics(context.Context) error {
	if r.model == nil {
		return nil
	}
	k := r.Proj.Components()
	data, err := figures.Diagnostics(figures.DiagnosticsData{Z: r.zs, K: k, Threshold: r.zcut,
		Title: fmt.Sprintf("Z of %s sampled pixels against chi-square, k = %d", jobkit.Count(int64(len(r.zs))), k)})
	if err != nil {
		return fmt.Errorf("diagnostics of %s: %w", r.o.Out, err)
	}
	if err := output.WriteFile(r.Dir.Path("diagnostics.png"), data, false); err != nil {
		return err
	}
	r.outputs = append(r.outputs, "diagnostics.png")
	return nil
}
