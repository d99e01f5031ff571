package changefolder

import (
	"bandfold/cmd/bandfold/internal/jobkit"
	"fmt"
	"math"
	"strconv"
)

// Percent writes a fraction as a percentage with two significant decimals
// (0.0005%, 1.2%, 52%), and 0% for zero.
func Percent(f float64) string {
	if f == 0 {
		return "0%"
	}
	pc := f * 100
	digits := max(0, 1-int(math.Floor(math.Log10(math.Abs(pc)))))
	return strconv.FormatFloat(pc, 'f', digits, 64) + "%"
}

// share writes "x of n what, p%", or "x of 0 what, undefined".
func share(x, n int64, what string) string {
	if n == 0 {
		return fmt.Sprintf("%s of 0 %s, undefined", jobkit.Count(x), what)
	}
	return fmt.Sprintf("%s of %s %s, %s", jobkit.Count(x), jobkit.Count(n), what, Percent(float64(x)/float64(n)))
}

// Lines is the summary of a change run for people, one line each, as the
// command prints it on stderr.
func (s *ChangeResult) Lines() []string {
	out := []string{fmt.Sprintf("change between %s and %s (%d components, threshold %s at Z = %.4g; chi-square median %.4g)",
		s.BeforeLabel, s.AfterLabel, s.Components, s.Threshold.Rule, s.Threshold.Z, s.Threshold.Median)}
	row := func(name, format string, args ...any) {
		out = append(out, fmt.Sprintf("  %-28s ", name)+fmt.Sprintf(format, args...))
	}
	row("valid pixels", "%s", jobkit.Count(s.ValidPixels))
	row("changed pixels", "%s", share(s.ChangedPixels, s.ValidPixels, "valid pixels"))
	if s.ValidAreaHa != nil {
		row("valid area", "%.2f ha (%.0f m2)", *s.ValidAreaHa, *s.ValidAreaM2)
	}
	if s.ChangedAreaHa != nil {
		row("mapped area of change", "%.2f ha (%.0f m2)", *s.ChangedAreaHa, *s.ChangedAreaM2)
	}
	row("change patches", "%d (min mapping unit %d px)", s.Patches, s.MinAreaPixels)
	if s.Threshold.Separability != nil {
		row("otsu separability", "%.3f", *s.Threshold.Separability)
	}
	switch n := s.Normalization; {
	case len(n.Bands) > 0:
		applied := "applied"
		if !n.Applied {
			applied = "NOT applied (see the warning)"
		}
		row("normalisation", "AFTER onto BEFORE over %s stable pixels (p >= 0.5), %s", jobkit.Count(int64(n.StablePixels)), applied)
		for _, b := range n.Bands {
			row("", "band %d: gain %.5g, offset %.5g, correlation %.3f", b.Band, b.Gain, b.Offset, b.Correlation)
		}
	default:
		row("normalisation", "none")
	}
	if s.Identical {
		row("no-change model", "none: the dates are identical")
	} else {
		conv := "converged"
		if !s.Converged {
			conv = "did NOT converge"
		}
		row("no-change model", "%d iterations on %s sampled pixels, %s", s.Iterations, jobkit.Count(int64(s.SamplePixels)), conv)
	}
	if r := s.Reference; r != nil {
		c := r.Confusion
		out = append(out, fmt.Sprintf("  against %s:", r.File),
			fmt.Sprintf("    recall (producer's accuracy): mapped %s; omission error %s", share(c.TruePositive, c.TruePositive+c.FalseNegative, "changed pixels"), rateText(r.OmissionError)),
			fmt.Sprintf("    precision (user's accuracy): changed %s; commission error %s", share(c.TruePositive, c.TruePositive+c.FalsePositive, "mapped pixels"), rateText(r.CommissionError)),
			fmt.Sprintf("    false alarms %s; F1 %s, overall accuracy %s", share(c.FalsePositive, c.FalsePositive+c.TrueNegative, "unchanged pixels"), rateText(r.F1), rateText(r.OverallAccuracy)),
			fmt.Sprintf("    confusion: TP %d  FP %d  FN %d  TN %d", c.TruePositive, c.FalsePositive, c.FalseNegative, c.TrueNegative))
	}
	return out
}

// rateText writes a rate as a percentage, or "undefined" (0/0).
func rateText(v *float64) string {
	if v == nil {
		return "undefined"
	}
	return Percent(*v)
}
