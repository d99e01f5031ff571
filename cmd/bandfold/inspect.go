package main

import (
	"bytes"
	"fmt"
	"io"
	"os"
	"path/filepath"

	"github.com/spf13/cobra"

	"bandfold/cmd/bandfold/internal/figures"
	"bandfold/raster"
	"bandfold/transform"
)

func newInspectCommand(g *globals) *cobra.Command {
	var plots string
	cmd := &cobra.Command{
		Use:   "inspect BASIS",
		Short: "Print the variance table of a saved basis, and plot it",
		Long: `inspect prints the variance table of a basis file. With --plots DIR it
also writes scree.png (share of variance per component, the cumulative
share, the chosen k and the broken-stick reference) and loadings.png (band x
component loadings of the kept components on a diverging scale centred on
zero).`,
		Example: `  bandfold inspect cube.basis.json
  bandfold inspect cube.basis.json --plots cube-plots --json`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			b, err := transform.ReadBasis(args[0])
			if err != nil {
				return err
			}
			if plots != "" {
				if err := writePlots(b, plots); err != nil {
					return err
				}
				g.info("wrote %s and %s", filepath.Join(plots, "scree.png"), filepath.Join(plots, "loadings.png"))
			}
			return reportBasis(g, b, args[0])
		},
	}
	cmd.Flags().StringVar(&plots, "plots", "", "folder for scree.png and loadings.png")
	return cmd
}

// writePlots draws the basis's figures into dir, creating it when needed.
func writePlots(b *transform.Basis, dir string) error {
	if raster.IsVirtual(dir) {
		return fmt.Errorf("plots folder %s: a GDAL virtual path cannot hold plots", dir)
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return fmt.Errorf("plots folder %s cannot be created: %w", dir, unwrapPath(err))
	}
	var names []string
	for _, band := range b.Bands {
		names = append(names, band.Name)
	}
	title := fmt.Sprintf("%s (%s mode, %d pixels)", filepath.Base(b.Source()), b.Mode, b.Pixels)
	draws := map[string]func(io.Writer) error{
		"scree.png": func(w io.Writer) error {
			return figures.Scree(w, figures.ScreeData{Title: "Variance by component: " + title, Eigenvalues: b.Eigenvalues, Chosen: b.Components})
		},
		"loadings.png": func(w io.Writer) error {
			return figures.Loadings(w, figures.LoadingsData{Title: "Loadings: " + title, BandNames: names, Vectors: b.Eigenvectors, Components: b.Components})
		},
	}
	for name, draw := range draws {
		var buf bytes.Buffer
		if err := draw(&buf); err != nil {
			return fmt.Errorf("plot %s: %w", name, err)
		}
		if err := writeFileAtomic(filepath.Join(dir, name), buf.Bytes()); err != nil {
			return err
		}
	}
	return nil
}

// writeFileAtomic writes data to path through a temporary file in the same
// folder, renamed on success.
func writeFileAtomic(path string, data []byte) error {
	tmp := raster.TempPath(path, "")
	if err := os.WriteFile(tmp, data, 0o644); err != nil {
		os.Remove(tmp)
		return fmt.Errorf("write %s: %w", path, unwrapPath(err))
	}
	if err := os.Rename(tmp, path); err != nil {
		os.Remove(tmp)
		return fmt.Errorf("write %s: %w", path, unwrapPath(err))
	}
	return nil
}

// unwrapPath drops the path that os errors repeat, since messages name it
// already.
func unwrapPath(err error) error {
	if pe, ok := err.(*os.PathError); ok {
		return pe.Err
	}
	return err
}
