package main

import (
	"context"
	"fmt"
	"strings"
	"unicode/utf8"

	"github.com/spf13/cobra"

	"bandfold/cmd/bandfold/internal/job"
)

// inspectFlags are the flags of inspect: the job's options and what to
// print.
type inspectFlags struct {
	job.InspectOptions
	// loadings prints the kept components' loadings as a table.
	loadings bool
}

func newInspectCommand(g *globals) *cobra.Command {
	fl := &inspectFlags{}
	cmd := &cobra.Command{
		Use:   "inspect BASIS",
		Short: "Print the variance table of a saved basis, and plot it",
		Long: `inspect prints the variance table of a basis file. With --loadings it also
prints the loadings of the kept components (band x component, the
eigenvectors). With --plots DIR it also writes scree.png (share of variance
per component, the cumulative share, the chosen k and the broken-stick
reference) and loadings.png (band x component loadings of the kept
components on a diverging scale centred on zero). The --json summary always
holds the band names and the kept components' loadings.`,
		Example: `  bandfold inspect cube.basis.json
  bandfold inspect cube.basis.json --loadings
  bandfold inspect cube.basis.json --plots cube-plots --json`,
		Args: args(cobra.ExactArgs(1)),
		RunE: g.runE(func(ctx context.Context, env job.Env, a []string) error {
			o := fl.InspectOptions
			o.Basis = a[0]
			res, err := job.Inspect(ctx, env, o)
			if err != nil {
				return err
			}
			if len(res.Plots) > 0 {
				g.info("wrote %s", strings.Join(res.Plots, " and "))
			}
			if err := g.reportBasis(res.Summary, o.Basis); err != nil {
				return err
			}
			if fl.loadings {
				g.reportLoadings(res.Summary)
			}
			return nil
		}),
	}
	f := cmd.Flags()
	f.StringVar(&fl.Plots, "plots", "", "folder for scree.png, loadings.png and report.html")
	f.BoolVar(&fl.loadings, "loadings", false, "print the kept components' loadings (bands x components) on stderr")
	f.BoolVar(&fl.Overwrite, "overwrite", false, "replace existing plots")
	return cmd
}

// reportLoadings prints the loadings of the kept components on stderr: one
// row per band (by name), one column per component, 4 decimals, numbers
// right-aligned under a header.
func (g *globals) reportLoadings(s job.BasisSummary) {
	if g.quiet || len(s.Loadings) == 0 {
		return
	}
	w := g.stderr
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
