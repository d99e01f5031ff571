package job

import (
	"context"
	"fmt"

	"gonum.org/v1/gonum/stat/distuv"

	"bandfold/cmd/bandfold/internal/figures"
	"bandfold/raster/output"
	"bandfold/transform/change"
)

// warnf keeps a warning about the map for the summary; summary prints
// them once the map is complete, so that a run that fails prints only its
// error.
func (r *changeRun) warnf(format string, args ...any) {
	r.warnings = append(r.warnings, fmt.Sprintf(format, args...))
}

// chisqMedian is the median of the chi-square distribution with k degrees
// of freedom.
func chisqMedian(k int) float64 { return distuv.ChiSquared{K: float64(k)}.Quantile(0.5) }

// checkThreshold warns when the no-change model did not converge, when an
// Otsu split separates poorly (eta below change.OtsuBound) and when a
// sample-based cut (otsu, sigma:N) falls below the chi-square median, where
// it flags more than half of the unchanged pixels.
func (r *changeRun) checkThreshold() {
	k := r.proj.Components()
	if !r.model.Converged {
		r.warnf("the no-change model did not converge in %d iterations: the threshold and the p-values are uncertain; look at diagnostics.png", r.model.Iterations)
	}
	t := r.o.Threshold
	if t.Rule == change.RuleOtsu {
		if eta, err := change.OtsuSeparability(r.zs); err == nil {
			r.eta = &eta
			if eta < change.OtsuBound {
				r.warnf("--threshold otsu: the histogram of log(1+Z) separates poorly (Otsu's eta = %.3f, below %.2f, that of a uniform histogram): there may be no change class to split off; prefer chisq:Q", eta, change.OtsuBound)
			}
		}
	}
	if med := chisqMedian(k); (t.Rule == change.RuleOtsu || t.Rule == change.RuleSigma) && r.zcut < med {
		r.warnf("--threshold %s cuts at Z = %.4g, below the chi-square median %.4g of the no-change model (k = %d): more than half of the unchanged pixels would be mapped as change; prefer chisq:Q", t, r.zcut, med, k)
	}
}

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
