package learn

import (
	"bytes"
	"context"
	"fmt"
	"io"
	"path/filepath"

	"bandfold/cmd/bandfold/internal/figures"
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/raster/output"
	"bandfold/transform"
)

// InspectOptions are the options of Inspect.
type InspectOptions struct {
	Basis string
	// Plots, when set, is the folder for scree.png and loadings.png.
	Plots     string
	Overwrite bool
	// MaxRMSE, when positive, is drawn as the budget line of rate.png.
	MaxRMSE float64
}

// InspectResult describes a basis file and the plots written.
type InspectResult struct {
	Basis   *transform.Basis
	Summary BasisSummary
	Plots   []string
}

// Inspect reads a basis and, with Plots, draws its figures.
func Inspect(_ context.Context, _ jobkit.Env, o InspectOptions) (_ *InspectResult, err error) {
	defer func() { err = jobkit.Classify(err) }()
	b, err := transform.ReadBasis(o.Basis)
	if err != nil {
		return nil, err
	}
	res := &InspectResult{Basis: b, Summary: Summarize(b, o.Basis)}
	res.Summary.Rate = b.RateTable()
	if o.MaxRMSE < 0 {
		return nil, jobkit.Usagef("--max-rmse %v: must be positive", o.MaxRMSE)
	}
	if o.Plots == "" {
		return res, nil
	}
	draws := append(basisPlots(b), ratePlot(b, res.Summary.Rate, o.MaxRMSE), plotDraw{name: "report.html"})
	var outs []output.Path
	for _, d := range draws {
		path := filepath.Join(o.Plots, d.name)
		if err := output.Check(path, o.Overwrite); err != nil {
			return nil, err
		}
		outs = append(outs, output.Path{Role: "plot", Path: path})
	}
	if err := output.Distinct([]output.Path{{Role: "basis", Path: o.Basis}}, outs); err != nil {
		return nil, err
	}
	// Draw everything first, so a failing plot leaves no file.
	data := make([][]byte, len(draws))
	for i, d := range draws {
		var buf bytes.Buffer
		if d.draw == nil {
			continue // the report, made from the figures below
		} else if err := d.draw(&buf); err != nil {
			return nil, fmt.Errorf("plot %s: %w", d.name, err)
		}
		data[i] = buf.Bytes()
	}
	if data[len(data)-1], err = inspectReport(res.Summary, data[:len(data)-1]); err != nil {
		return nil, err
	}
	for i := range draws {
		path := outs[i].Path
		if err := output.WriteFile(path, data[i], o.Overwrite); err != nil {
			return nil, err
		}
		res.Plots = append(res.Plots, path)
	}
	return res, nil
}

// keptLoadings returns the eigenvectors of the kept components of b, copied
// and component-major: element [i][j] is the loading of band j on component
// i+1, for i < b.Components.
func keptLoadings(b *transform.Basis) [][]float64 {
	out := make([][]float64, b.Components)
	for i := range out {
		out[i] = append([]float64(nil), b.Eigenvectors[i]...)
	}
	return out
}

type plotDraw struct {
	name string
	draw func(io.Writer) error
}

// basisPlots are the figures of a basis: the scree plot and the loadings.
func basisPlots(b *transform.Basis) []plotDraw {
	var names []string
	for _, band := range b.Bands {
		names = append(names, band.Name)
	}
	method := "principal components"
	if b.Method == transform.MNF {
		method = "minimum noise fraction"
	}
	src := filepath.Base(b.Source())
	detail := fmt.Sprintf("%s, %s mode, %d pixels", method, b.Mode, b.Pixels)
	return []plotDraw{
		{"scree.png", func(w io.Writer) error {
			return figures.Scree(w, figures.ScreeData{Title: "Variance by component: " + src, Detail: detail, Eigenvalues: b.Eigenvalues, Chosen: b.Components})
		}},
		{"loadings.png", func(w io.Writer) error {
			return figures.Loadings(w, figures.LoadingsData{Title: fmt.Sprintf("Loadings: %s (%s)", src, detail), BandNames: names,
				Vectors: b.Eigenvectors, Components: b.Components, WavelengthsNM: b.WavelengthsNM})
		}},
	}
}

// ratePlot is rate.png: the estimated size ratio against the predicted
// RMSE of each row of the rate table, with the budget line when given.
func ratePlot(b *transform.Basis, rows []transform.RateRow, budget float64) plotDraw {
	d := figures.RateData{Title: fmt.Sprintf("Estimated size against error: %s, %s", filepath.Base(b.Source()), b.Method), Budget: budget}
	for _, r := range rows {
		if r.SizeRatio != nil {
			d.K, d.RMSE, d.Ratio = append(d.K, r.K), append(d.RMSE, r.RMSE), append(d.Ratio, *r.SizeRatio)
		}
	}
	return plotDraw{"rate.png", func(w io.Writer) error { return figures.Rate(w, d) }}
}
