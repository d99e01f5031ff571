package cli

import (
	"fmt"
	"io"
	"math"
	"strings"

	"bandfold/cmd/bandfold/internal/job"
	"bandfold/cmd/bandfold/internal/scenario"
)

// BasisTable prints a basis's variance table to w: every component with
// all, else the kept ones and a few more.
func BasisTable(w io.Writer, s job.BasisSummary, path string, all bool) {
	{
		if path != "" {
			fmt.Fprintf(w, "basis %s: %d bands, %d pixels, %s mode\n", path, s.Bands, s.Pixels, s.Mode)
		}
		snr := s.SNR != nil
		fmt.Fprintf(w, "%4s | %14s | %12s | %8s | %9s | %12s", "pc", "eigenvalue", "sd", "share", "cum_share", "broken_stick")
		if snr {
			fmt.Fprintf(w, " | %10s", "snr")
		}
		fmt.Fprintln(w)
		// Long tables (hyperspectral bases) stop after the kept components
		// and a few more, unless --verbose.
		rows := len(s.Eigenvalues)
		if !all {
			rows = min(rows, max(s.Components+5, 10))
		}
		for i, v := range s.Eigenvalues[:rows] {
			mark := " "
			if i < s.Components {
				mark = "*"
			}
			fmt.Fprintf(w, "%3d%s | %14.6g | %12.6g | %8.5f | %9.5f | %12.5f", i+1, mark, v, math.Sqrt(max(v, 0)), s.Explained[i], s.Cumulative[i], s.BrokenStickShares[i])
			if snr {
				fmt.Fprintf(w, " | %10.4g", s.SNR[i])
			}
			fmt.Fprintln(w)
		}
		if rows < len(s.Eigenvalues) {
			fmt.Fprintf(w, "%4s | (%d more components, %.5f of the variance; --verbose lists them)\n", "...", len(s.Eigenvalues)-rows, 1-s.Cumulative[rows-1])
		}
		fmt.Fprintf(w, "kept (*): %d components, %.4f of the variance; broken-stick rule keeps %d", s.Components, s.Cumulative[s.Components-1], s.BrokenStick)
		if s.Kaiser != nil {
			fmt.Fprintf(w, "; eigenvalue > 1 keeps %d", *s.Kaiser)
		}
		fmt.Fprintln(w)
	}
}

// UnfoldText prints what unfold wrote and, with a comparison, the loss.
func UnfoldText(w io.Writer, r *job.UnfoldResult) {
	fmt.Fprintf(w, "%s: %d bands rebuilt from %d components, %d valid pixels, %s\n", r.Output, r.Bands, r.Components, r.Pixels, r.Type)
	if r.LossReport == nil {
		return
	}
	fmt.Fprintf(w, "loss against %s over %d pixels:\n", r.Compared, r.ComparedPixels)
	fmt.Fprintf(w, "  rmse %.6g (written values %.6g), max abs error %.6g, mean spectral angle %.4f deg\n", r.RMSE, *r.RMSEWritten, r.MaxAbs, r.MeanSAM)
	if r.MeanPSNR != nil {
		fmt.Fprintf(w, "  mean psnr %.2f dB\n", *r.MeanPSNR)
	}
	if r.CompressionRatio != nil {
		fmt.Fprintf(w, "  compression %.2f : 1 (lossless DEFLATE copy %d bytes; components %d + basis %d bytes)\n",
			*r.CompressionRatio, r.OriginalDeflateBytes, r.ComponentsBytes, r.BasisBytes)
	}
}

// DemoText prints the closing report of the demo.
func DemoText(w io.Writer, o job.DemoOptions, r *job.DemoResult) {
	c := r.Scenario
	fmt.Fprintf(w, "%s (invented): %dx%d pixels at 10 m, dates %s and %s\n", scenario.Name, o.Size, o.Size, c.Dates()[0], c.Dates()[1])
	for _, e := range c.Events() {
		fmt.Fprintf(w, "  event %d: %s, %s -> %s, %d pixels (%.1f ha)\n", e.ID, e.Name, e.From, e.To, e.Area, float64(e.Area)*scenario.PixelSize*scenario.PixelSize/1e4)
	}
	hl, hu, pl, chg := r.HyperLearn.Summary, r.HyperUnfold, r.PairLearn.Summary, r.Change
	fmt.Fprintf(w, "\n== %s (invented scenario): report\n", scenario.Name)
	fmt.Fprintf(w, "compression of the %d-band hyperspectral cube:\n", hl.Bands)
	fmt.Fprintf(w, "  %d components keep %.2f%% of the variance (broken-stick rule: %d)\n", hl.Components, 100*hl.Cumulative[hl.Components-1], hl.BrokenStick)
	if hu.LossReport != nil && hu.CompressionRatio != nil {
		psnr := "undefined"
		if hu.MeanPSNR != nil {
			psnr = fmt.Sprintf("%.1f dB", *hu.MeanPSNR)
		}
		fmt.Fprintf(w, "  int16 components + basis: %.1f : 1 against lossless DEFLATE; rmse %.2f, mean PSNR %s, mean spectral angle %.2f deg\n",
			*hu.CompressionRatio, hu.RMSE, psnr, hu.MeanSAM)
	}
	fmt.Fprintf(w, "multispectral pair: %d components keep %.2f%%; explained on %s %s, on %s %s\n",
		pl.Components, 100*pl.Cumulative[pl.Components-1], c.Dates()[0], share(r.Folds[0].ExplainedScene), c.Dates()[1], share(r.Folds[1].ExplainedScene))
	fmt.Fprintf(w, "change %s -> %s: %d changed pixels", c.Dates()[0], c.Dates()[1], chg.ChangedPixels)
	if chg.ChangedAreaHa != nil {
		fmt.Fprintf(w, ", mapped area of change %.1f ha", *chg.ChangedAreaHa)
	}
	fmt.Fprintf(w, ", %d patches\n", chg.Patches)
	if ref := chg.Reference; ref != nil {
		fa := "undefined"
		if ref.FalseAlarmRate != nil {
			fa = fmt.Sprintf("%.3f%%", 100**ref.FalseAlarmRate)
		}
		fmt.Fprintf(w, "  against the scenario's truth: recall %s, false alarms %s of unchanged pixels, precision %s, F1 %s\n",
			Rate(ref.Recall, 3), fa, Rate(ref.Precision, 3), Rate(ref.F1, 3))
	}
	fmt.Fprintf(w, "  %s\n", job.InventedNote)
	fmt.Fprintf(w, "  %s\n", job.Caution)
	fmt.Fprintf(w, "\noutputs in %s:\n", o.Dir)
	for _, p := range r.Outputs {
		fmt.Fprintf(w, "  %s\n", p)
	}
}

// share prints an explained share, or "undefined".
func share(v *float64) string { return Rate(v, 4) }

// Rate prints a rate with the given decimals, or "undefined" (0/0).
func Rate(v *float64, decimals int) string {
	if v == nil {
		return "undefined"
	}
	return fmt.Sprintf("%.*f", decimals, *v)
}

// FoldText prints what fold did with one scene.
func FoldText(w io.Writer, r job.FoldScene) {
	switch r.Status {
	case "skipped":
		fmt.Fprintf(w, "%s: complete, skipped\n", r.Output)
		return
	case "failed":
		msg := r.Error
		if !strings.Contains(msg, r.Input) {
			msg = r.Input + ": " + msg
		}
		fmt.Fprintf(w, "bandfold: %s\n", msg)
		return
	}
	fmt.Fprintf(w, "%s: %d components, %d valid pixels, %.1f s\n", r.Output, r.Components, r.Pixels, r.Seconds)
	scene := "undefined"
	if r.ExplainedScene != nil {
		scene = fmt.Sprintf("%.4f", *r.ExplainedScene)
	}
	fmt.Fprintf(w, "  variance explained by the kept components: %.4f on the fitting scene, %s on this scene\n", r.ExplainedFit, scene)
	if r.Preview != "" {
		fmt.Fprintf(w, "  quicklook %s\n", r.Preview)
	}
}
