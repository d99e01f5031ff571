package job

import (
	"fmt"
	"path/filepath"
)

// inspectReport renders report.html for a basis: the variance table, the
// scree and loadings figures (PNG data in the order of basisPlots) and the
// kept components' loadings.
func inspectReport(s BasisSummary, figures [][]byte) ([]byte, error) {
	rep := &report{Title: "Basis " + filepath.Base(s.Basis), Caution: Caution,
		Subtitle: fmt.Sprintf("%s mode, %d bands, %d pixels, %d components kept (broken stick: %d)", s.Mode, s.Bands, s.Pixels, s.Components, s.BrokenStick)}
	variance := reportTable{Caption: "Variance by component", Head: []string{"pc", "eigenvalue", "share", "cumulative share", "broken stick"}}
	for i, ev := range s.Eigenvalues {
		bs := ""
		if i < len(s.BrokenStickShares) {
			bs = fmt.Sprintf("%.4f", s.BrokenStickShares[i])
		}
		variance.Rows = append(variance.Rows, []string{fmt.Sprintf("PC%d", i+1), fmt.Sprintf("%.6g", ev), fmt.Sprintf("%.4f", s.Explained[i]), fmt.Sprintf("%.4f", s.Cumulative[i]), bs})
	}
	loadings := reportTable{Caption: "Loadings of the kept components", Head: []string{"band"}}
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
	sec := reportSection{Heading: "Variance and loadings", Tables: []reportTable{variance, loadings}}
	for i, name := range []string{"scree.png: share of variance per component", "loadings.png: band x component loadings"} {
		if i < len(figures) {
			sec.Figures = append(sec.Figures, pngFigure(name, figures[i]))
		}
	}
	rep.Sections = []reportSection{sec}
	return rep.render()
}
