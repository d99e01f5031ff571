package job

import (
	"bandfold/cmd/bandfold/internal/figures"
	"bandfold/raster/output"
	"context"
	"fmt"
)

// thresholdSummary is the threshold for the summary.
func (r *changeRun) thresholdSummary() ThresholdSummary {
	return ThresholdSummary{Rule: r.o.Threshold.String(), Z: r.zcut, Median: chisqMedian(r.proj.Components()), Separability: r.eta}
}

// diagnostics writes diagnostics.png: the histogram of Z over the sample
// against the chi-square density with k degrees of freedom, the threshold
// marked, and a QQ panel.
func (r *changeRun) diagnostics(context.Context) error {
	if r.model == nil {
		return nil
	}
	k := r.proj.Components()
	data, err := figures.Diagnostics(figures.DiagnosticsData{Z: r.zs, K: k, Threshold: r.zcut,
		Title: fmt.Sprintf("Z of %s sampled pixels against chi-square, k = %d", Count(int64(len(r.zs))), k)})
	if err != nil {
		return fmt.Errorf("diagnostics of %s: %w", r.o.Out, err)
	}
	if err := output.WriteFile(r.dir.Path("diagnostics.png"), data, false); err != nil {
		return err
	}
	r.outputs = append(r.outputs, "diagnostics.png")
	return nil
}
