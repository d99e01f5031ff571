package learn

import (
	"fmt"
	"path/filepath"

	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/report"
	"bandfold/transform"
)

// inspectReport renders report.html for a basis: the variance table, the
// scree and loadings figures (PNG data in the order of basisPlots, then
// rate.png), the kept components' loadings and the rate–distortion table.
func inspectReport(s BasisSummary, figures [][]byte) ([]byte, error) {
	rep := &report.Report{Title: "Basis " + filepath.Base(s.Basis), Footnote: "Change maps made with this basis: " + jobkit.Caution,
		Subtitle: fmt.Sprintf("%s mode, %d bands, %d pixels, %d components kept (broken stick: %d)", s.Mode, s.Bands, s.Pixels, s.Components, s.BrokenStick)}
	variance := report.ReportTable{Caption: "Variance by component", Head: []string{"pc", "eigenvalue", "share", "cumulative share", "broken stick"}}
	shown := min(len(s.Eigenvalues), max(s.Components, reportRows))
	if shown < len(s.Eigenvalues) {
		variance.Caption = fmt.Sprintf("Variance by component (the first %d of %d; all in the basis file)", shown, len(s.Eigenvalues))
	}
	for i, ev := range s.Eigenvalues[:shown] {
		bs := ""
		if i < len(s.BrokenStickShares) {
			bs = fmt.Sprintf("%.4f", s.BrokenStickShares[i])
		}
		variance.Rows = append(variance.Rows, []string{fmt.Sprintf("PC%d", i+1), fmt.Sprintf("%.6g", ev), fmt.Sprintf("%.4f", s.Explained[i]), fmt.Sprintf("%.4f", s.Cumulative[i]), bs})
	}
	loadings := report.ReportTable{Caption: "Loadings of the kept components", Head: []string{"band"}}
	for i := range s.Loadings {
		loadings.Head = append(loadings.Head, fmt.Sprintf("PC%d", i+1))
	}
	for j, name := range s.BandNames {
		row := []string{name}
		for _, vec := range s.Loadings {
			row = append(row, fmt.Sprintf("%.4f", vec[j]))
		}
		loadings.Rows = append(loadings.Rows, row)
	}
	sec := report.ReportSection{Heading: "Variance and loadings", Tables: []report.ReportTable{variance, loadings}}
	if len(s.BandNames) > reportRows {
		// A hyperspectral basis: loadings.png shows every band.
		sec.Tables = sec.Tables[:1]
		sec.Notes = []string{fmt.Sprintf("The loadings of the %d bands are drawn in loadings.png and listed in the basis file.", len(s.BandNames))}
	}
	for i, name := range []string{"scree.png: share of variance per component", "loadings.png: band x component loadings"} {
		if i < len(figures) {
			sec.Figures = append(sec.Figures, report.PngFigure(name, figures[i]))
		}
	}
	rep.Sections = []report.ReportSection{sec}
	if s.Rate != nil {
		rate := report.ReportSection{Heading: "Rate and distortion", Tables: []report.ReportTable{rateTable(s.Rate)},
			Notes: []string{"Per number of kept components k: the RMSE of dropping the others, its PSNR (20 log10(peak / RMSE), peak the largest band range in the basis), and, quantised at the coarsest step that keeps those k, the predicted RMSE and the estimated Gaussian rate (bits per pixel) and size ratio against the bands' stored types."}}
		if len(figures) > 2 {
			rate.Figures = append(rate.Figures, report.PngFigure("rate.png: estimated size ratio against predicted RMSE, one point per k", figures[2]))
		}
		rep.Sections = append(rep.Sections, rate)
	}
	return rep.Render()
}

// reportRows is the most rows a report table of a basis shows (a
// printed page); the basis file and the figures hold the rest.
const reportRows = 24

// rateTable is the rate–distortion table of a basis: its first reportRows
// rows.
func rateTable(rows []transform.RateRow) report.ReportTable {
	t := report.ReportTable{Caption: "Rate and distortion by kept components", Head: []string{"k", "truncation RMSE", "PSNR (dB)", "step", "RMSE", "bits per pixel", "size ratio"}}
	if len(rows) > reportRows {
		t.Caption = fmt.Sprintf("Rate and distortion by kept components (k = 1 to %d of %d; all with bandfold inspect --rate --json)", reportRows, len(rows))
		rows = rows[:reportRows]
	}
	for _, r := range rows {
		t.Rows = append(t.Rows, []string{fmt.Sprint(r.K), fmt.Sprintf("%.6g", r.TruncationRMSE), report.Num(r.PSNR, 2), fmt.Sprintf("%.6g", r.Step),
			fmt.Sprintf("%.6g", r.RMSE), fmt.Sprintf("%.2f", r.BitsPerPixel), report.Num(r.SizeRatio, 2)})
	}
	return t
}
