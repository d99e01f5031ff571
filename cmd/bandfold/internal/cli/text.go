package cli

import (
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"
	"unicode/utf8"

	"bandfold/cmd/bandfold/internal/changefolder"
	"bandfold/cmd/bandfold/internal/demo"
	"bandfold/cmd/bandfold/internal/fold"
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/learn"
	"bandfold/cmd/bandfold/internal/scenario"
	"bandfold/cmd/bandfold/internal/timeline"
)

// BasisTable prints a basis's variance table to w: every component with
// all, else the kept ones and a few more.
func BasisTable(w io.Writer, s learn.BasisSummary, path string, all bool) {
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
		if s.Rate != nil {
			RateTable(w, s, rows)
		}
	}
}

// RateTable prints the first rows of a basis's rate–distortion table: per
// k, the truncation RMSE and its PSNR, and at the matching step the
// predicted RMSE, the estimated bits per pixel and size ratio.
func RateTable(w io.Writer, s learn.BasisSummary, rows int) {
	fmt.Fprintln(w, "rate and distortion (PSNR peak: the largest band range in the basis; step: the coarsest that keeps k components):")
	fmt.Fprintf(w, "%4s | %15s | %9s | %12s | %12s | %14s | %10s\n", "k", "truncation_rmse", "psnr_db", "step", "rmse", "bits_per_pixel", "size_ratio")
	for _, r := range s.Rate[:min(rows, len(s.Rate))] {
		fmt.Fprintf(w, "%4d | %15.6g | %9s | %12.6g | %12.6g | %14.2f | %10s\n", r.K, r.TruncationRMSE, Rate(r.PSNR, 2), r.Step, r.RMSE, r.BitsPerPixel, Rate(r.SizeRatio, 2))
	}
}

// UnfoldText prints what unfold wrote and, with a comparison, the loss.
func UnfoldText(w io.Writer, r *fold.UnfoldResult) {
	fmt.Fprintf(w, "%s: %d bands rebuilt from %d components, %d valid pixels, %s\n", r.Output, r.Bands, r.Components, r.Pixels, r.Type)
	if r.LossReport == nil {
		return
	}
	fmt.Fprintf(w, "loss against %s over %d pixels:\n", r.Compared, r.ComparedPixels)
	fmt.Fprintf(w, "  rmse %.6g (written values %.6g), max abs error %.6g, mean spectral angle %.4f deg\n", r.RMSE, *r.RMSEWritten, r.MaxAbs, r.MeanSAM)
	if r.MeanPSNR != nil {
		fmt.Fprintf(w, "  mean psnr %.2f dB (the mean over bands of 20 log10(range / band rmse), range = max - min of the band's valid values in the original)\n", *r.MeanPSNR)
	}
	if r.OverallPSNR != nil {
		fmt.Fprintf(w, "  overall psnr %.2f dB = 20 log10(peak / rmse), peak %.6g = the largest band range (max - min of valid values) recorded in the basis\n", *r.OverallPSNR, r.PSNRPeak)
	}
	if r.CompressionRatio != nil {
		fmt.Fprintf(w, "  compression %.2f : 1 (lossless DEFLATE copy %d bytes; components %d + basis %d bytes)\n",
			*r.CompressionRatio, r.OriginalDeflateBytes, r.ComponentsBytes, r.BasisBytes)
	}
}

// DemoText prints the closing report of the demo.
func DemoText(w io.Writer, o demo.DemoOptions, r *demo.DemoResult) {
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
	if h := r.Hyper; h != nil {
		fmt.Fprintf(w, "denoising without the water-vapour windows (%d of %d bands kept), k = %d components each:\n", h.Bands, hl.Bands, h.Components)
		fmt.Fprintf(w, "  rmse against the noise-free cube: noisy %.2f, principal components %.2f, minimum noise fraction %.2f\n", h.RMSENoisy, h.RMSEPCA, h.RMSEMNF)
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
	if tl := r.Timeline; tl != nil {
		demoTimelineText(w, tl)
	}
	fmt.Fprintf(w, "  %s\n", demo.InventedNote)
	fmt.Fprintf(w, "  %s\n", jobkit.Caution)
	fmt.Fprintf(w, "\noutputs in %s:\n", o.Dir)
	for _, p := range r.Outputs {
		fmt.Fprintf(w, "  %s\n", p)
	}
}

// demoTimelineText prints, for each event of the demo's series, its true
// date and the date the timeline found.
func demoTimelineText(w io.Writer, tl *demo.DemoTimeline) {
	res := tl.Timeline
	n := len(res.Scenes)
	fmt.Fprintf(w, "timeline of the %d-date series (%dx%d pixels, %s to %s; --normalize %s, --confirm %s):\n",
		n, tl.Size, tl.Size, res.Scenes[0].Date, res.Scenes[n-1].Date, res.Normalize, res.Confirm)
	for _, e := range tl.Events {
		found := "found no lasting change"
		if e.Found != "none" {
			found = "found " + e.Found
		}
		if !e.Lasting {
			fmt.Fprintf(w, "  %s on %s only: %s (the most common); no lasting change at %.1f%% of its %d pixels\n", e.Name, e.Date, found, 100*e.Correct, e.Pixels)
		} else {
			fmt.Fprintf(w, "  %s from %s: %s (the most common first lasting change); the right date at %.1f%% of its %d pixels\n", e.Name, e.Date, found, 100*e.Correct, e.Pixels)
		}
	}
	if tl.Unchanged > 0 {
		fmt.Fprintf(w, "  unchanged land: %.2f%% of its %d pixels with a lasting change\n", 100*float64(tl.UnchangedLasting)/float64(tl.Unchanged), tl.Unchanged)
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
func FoldText(w io.Writer, r fold.FoldScene) {
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
	if b := r.BudgetReport; b != nil {
		psnr := "undefined (no error)"
		if b.AchievedPSNR != nil {
			psnr = fmt.Sprintf("%.2f dB", *b.AchievedPSNR)
		}
		fmt.Fprintf(w, "  budget rmse %.6g: predicted %.6g, achieved %.6g (psnr %s, peak %.6g = the largest band range in the basis)\n",
			b.BudgetRMSE, b.PredictedRMSE, b.AchievedRMSE, psnr, b.PSNRPeak)
		fmt.Fprintf(w, "  %s codes at step %.6g (write %d of at most 3); %d bytes", r.Type, b.Step, b.Attempts, b.BytesWritten)
		if b.CompressionRatio != nil {
			fmt.Fprintf(w, ", compression %.2f : 1 against a lossless DEFLATE copy (%d bytes) with the basis (%d bytes)", *b.CompressionRatio, b.OriginalDeflateBytes, b.BasisBytes)
		}
		fmt.Fprintln(w)
		if b.CompressionRatio != nil && b.OriginalDeflateSampled < 1 {
			fmt.Fprintf(w, "  the copy's size is estimated from %.1f%% of the input compressed alike (standard error %.2f%%); unfold --compare makes the whole copy\n",
				100*b.OriginalDeflateSampled, 100*b.OriginalDeflateStdErr/float64(b.OriginalDeflateBytes))
		}
	}
	if r.Preview != "" {
		fmt.Fprintf(w, "  quicklook %s\n", r.Preview)
	}
}

// TimelineText prints a timeline run: a line per step and the outputs.
func TimelineText(w io.Writer, r *timeline.TimelineResult) {
	n := len(r.Scenes)
	fmt.Fprintf(w, "timeline %s to %s: %d dates, %d components, threshold %s, confirmation %s\n", r.Scenes[0].Date, r.Scenes[n-1].Date, n, r.Components, r.Threshold, r.Confirm)
	for _, s := range r.Steps {
		area := ""
		if s.LastingAreaHa != nil {
			area = fmt.Sprintf(" (%.1f ha)", *s.LastingAreaHa)
		}
		note := ""
		if !s.Confirmable {
			note = "; last step: no later date to confirm it"
		}
		fmt.Fprintf(w, "  %s to %s: Z > %.4g, %s flagged, %s lasting%s%s\n", s.From, s.To, s.Threshold.Z, jobkit.Count(s.FlaggedPixels), jobkit.Count(s.LastingPixels), area, note)
	}
	fmt.Fprintf(w, "  %s of %s valid pixels with at least one lasting change\n", jobkit.Count(r.ChangedPixels), jobkit.Count(r.ValidPixels))
	for _, p := range r.Outputs {
		fmt.Fprintf(w, "  wrote %s\n", r.Paths.Resolve(p))
	}
	fmt.Fprintf(w, "note: %s\n", jobkit.Caution)
}

// ChangeText prints a change summary: its lines, the outputs and the
// caution.
func ChangeText(w io.Writer, s *changefolder.ChangeResult) {
	for _, line := range s.Lines() {
		fmt.Fprintln(w, line)
	}
	for _, p := range s.Outputs {
		fmt.Fprintf(w, "  wrote %s\n", s.Paths.Resolve(p))
	}
	fmt.Fprintf(w, "note: %s\n", jobkit.Caution)
}

// LoadingsTable prints the loadings of the kept components on stderr: one
// row per band (by name), one column per component, 4 decimals, numbers
// right-aligned under a header.
func LoadingsTable(w io.Writer, s learn.BasisSummary) {
	if len(s.Loadings) == 0 {
		return
	}
	nameW := len("band")
	for _, n := range s.BandNames {
		nameW = max(nameW, utf8.RuneCountInString(n)) // fmt pads by runes
	}
	cells := make([][]string, len(s.BandNames))
	colW := make([]int, len(s.Loadings))
	for i := range s.Loadings {
		colW[i] = len(fmt.Sprintf("PC%d", i+1))
	}
	for j := range s.BandNames {
		cells[j] = make([]string, len(s.Loadings))
		for i, vec := range s.Loadings {
			cells[j][i] = fmt.Sprintf("%.4f", vec[j])
			colW[i] = max(colW[i], len(cells[j][i]))
		}
	}
	fmt.Fprintf(w, "loadings of the %d kept components:\n", len(s.Loadings))
	fmt.Fprintf(w, "%-*s", nameW, "band")
	for i := range s.Loadings {
		fmt.Fprintf(w, " | %*s", colW[i], fmt.Sprintf("PC%d", i+1))
	}
	fmt.Fprintln(w)
	for j, name := range s.BandNames {
		fmt.Fprintf(w, "%-*s", nameW, name)
		for i := range s.Loadings {
			fmt.Fprintf(w, " | %*s", colW[i], cells[j][i])
		}
		fmt.Fprintln(w)
	}
}

// SuggestText lists the bands whose estimated signal-to-noise ratio is
// under job.SuggestSNR.
func SuggestText(w io.Writer, list []learn.BandSNR) {
	fmt.Fprintf(w, "%d bands with estimated signal-to-noise ratio below %g (consider --exclude):\n", len(list), learn.SuggestSNR)
	for _, b := range list {
		fmt.Fprintf(w, "  band %d (%s, %g nm): snr %.3g\n", b.Band, b.Name, b.WavelengthNM, b.SNR)
	}
}

// ParseAccuracy reads --expected-accuracy: "change=0.7,no change=0.95".
func ParseAccuracy(s string) (map[string]float64, error) {
	out := map[string]float64{}
	for _, part := range strings.Split(s, ",") {
		if strings.TrimSpace(part) == "" {
			continue
		}
		k, v, ok := strings.Cut(part, "=")
		u, err := strconv.ParseFloat(strings.TrimSpace(v), 64)
		if !ok || err != nil || u <= 0 || u > 1 {
			return nil, jobkit.Usagef("--expected-accuracy %q: want class=U with 0 < U <= 1, such as change=0.7,no change=0.95", part)
		}
		out[strings.TrimSpace(k)] = u
	}
	return out, nil
}
