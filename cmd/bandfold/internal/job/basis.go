package job

import (
	"errors"
	"fmt"

	"bandfold/bands"
	"bandfold/raster/output"
	"bandfold/transform"
)

// fitBasis checks the accumulated statistics and decomposes them. what
// names the inputs for error messages.
func fitBasis(env Env, acc *bands.Accumulator, mode transform.Mode, info []transform.Band, what string) (*transform.Basis, error) {
	p := acc.Bands()
	n := acc.Count()
	switch {
	case n == 0:
		return nil, fmt.Errorf("no valid pixels in %s after nodata and mask", what)
	case n < float64(p+1):
		return nil, fmt.Errorf("only %.0f valid pixels in %s for %d bands: need at least bands + 1", n, what, p)
	}
	if mode == transform.Correlation {
		if _, err := acc.Correlation(nil); err != nil {
			var zv *bands.ZeroVarianceError
			if errors.As(err, &zv) {
				return nil, fmt.Errorf("band %q of %s is constant over the valid pixels, so correlation mode cannot standardise it; leave it out with --bands", info[zv.Band].Name, what)
			}
			return nil, err
		}
	}
	mins, maxs := acc.Min(nil), acc.Max(nil)
	for i := range info {
		info[i].Min, info[i].Max = mins[i], maxs[i]
	}
	b, err := transform.NewBasis(mode, info, int64(n), acc.Mean(nil), acc.Covariance(nil))
	if err != nil {
		return nil, fmt.Errorf("fit basis on %s: %w", what, err)
	}
	b.Tool = env.Version
	return b, nil
}

// choose sets the number of kept components: k when given, else the fewest
// whose cumulative share of variance reaches fraction.
func choose(b *transform.Basis, k int, fraction float64) {
	if k == 0 {
		k = transform.ComponentsFor(b.Eigenvalues, fraction)
	}
	b.Components = k
}

// checkChoice refuses --components and --variance values that cannot be
// right.
func checkChoice(components int, variance float64) error {
	if components < 0 {
		return Usagef("--components %d: must be positive", components)
	}
	if components > 0 && variance == 0 {
		return nil // the count is given: no share is needed
	}
	if err := transform.ValidateFraction(variance); err != nil {
		return Usagef("--variance %v: must be in (0, 1]", variance)
	}
	return nil
}

// writeBasis writes a basis file through the output lifecycle.
func writeBasis(b *transform.Basis, path string, overwrite bool) error {
	data, err := b.Marshal()
	if err != nil {
		return fmt.Errorf("write basis %s: %w", path, err)
	}
	return output.WriteFile(path, data, overwrite)
}

// BasisSummary describes a basis: its variance table and the component
// counts of the usual selection rules.
type BasisSummary struct {
	Basis       string    `json:"basis,omitempty"`
	Pixels      int64     `json:"pixels"`
	Bands       int       `json:"bands"`
	BandNames   []string  `json:"band_names"`
	Mode        string    `json:"mode"`
	Eigenvalues []float64 `json:"eigenvalues"`
	Explained   []float64 `json:"explained"`
	Cumulative  []float64 `json:"cumulative"`
	// BrokenStickShares are the expected shares of the broken-stick model.
	BrokenStickShares []float64 `json:"-"`
	Components        int       `json:"components"`
	BrokenStick       int       `json:"broken_stick"`
	Kaiser            *int      `json:"eigenvalue_above_one,omitempty"`
	// Loadings are the eigenvectors of the kept components, component-major:
	// Loadings[i][j] is the loading of band j on component i+1.
	Loadings [][]float64 `json:"loadings"`
}

// Summarize describes basis b read from or written to path.
func Summarize(b *transform.Basis, path string) BasisSummary {
	s := BasisSummary{
		Basis: path, Pixels: b.Pixels, Bands: len(b.Bands), Mode: string(b.Mode),
		Eigenvalues: b.Eigenvalues, Explained: transform.Explained(b.Eigenvalues),
		Cumulative: transform.Cumulative(b.Eigenvalues), Components: b.Components,
		BrokenStick:       transform.BrokenStick(b.Eigenvalues),
		BrokenStickShares: transform.BrokenStickShares(len(b.Eigenvalues)),
		Loadings:          keptLoadings(b),
	}
	for _, band := range b.Bands {
		s.BandNames = append(s.BandNames, band.Name)
	}
	if b.Mode == transform.Correlation {
		k := transform.KaiserCount(b.Eigenvalues)
		s.Kaiser = &k
	}
	return s
}
