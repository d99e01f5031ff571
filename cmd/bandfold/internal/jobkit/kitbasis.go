package jobkit

import (
	"bandfold/bands"
	"bandfold/raster/output"
	"bandfold/transform"
	"errors"
	"fmt"
	"path/filepath"
)

// FitBasis checks the accumulated statistics (CheckFit) and decomposes
// them. what names the inputs for error messages.
func FitBasis(env Env, acc *bands.Accumulator, mode transform.Mode, info []transform.Band, what string) (*transform.Basis, error) {
	if err := CheckFit(acc, mode, info, what); err != nil {
		return nil, err
	}
	b, err := transform.NewBasis(mode, info, int64(acc.Count()), acc.Mean(nil), acc.Covariance(nil))
	if err != nil {
		return nil, fmt.Errorf("fit basis on %s: %w", what, err)
	}
	b.Tool = env.Version
	return b, nil
}

// CheckFit checks that the accumulated statistics can be fitted in mode:
// enough valid pixels, a band with variance, and in correlation mode none
// without; it sets each band's extremes in info. what names the inputs for
// error messages.
func CheckFit(acc *bands.Accumulator, mode transform.Mode, info []transform.Band, what string) error {
	p := acc.Bands()
	n := acc.Count()
	switch {
	case n == 0:
		return fmt.Errorf("no valid pixels in %s after nodata and mask", what)
	case n < float64(p+1):
		return fmt.Errorf("only %.0f valid pixels in %s for %d bands: need at least bands + 1", n, what, p)
	}
	if mode == transform.Correlation {
		if _, err := acc.Correlation(nil); err != nil {
			var zv *bands.ZeroVarianceError
			if errors.As(err, &zv) {
				return fmt.Errorf("band %q of %s is constant over the valid pixels, so correlation mode cannot standardise it; leave it out with --bands", info[zv.Band].Name, what)
			}
			return err
		}
	}
	mins, maxs := acc.Min(nil), acc.Max(nil)
	constant := true
	for i := range info {
		info[i].Min, info[i].Max = mins[i], maxs[i]
		constant = constant && mins[i] == maxs[i]
	}
	if constant {
		return fmt.Errorf("every band of %s is constant over the valid pixels: there is no variance to fit components to", what)
	}
	return nil
}

// WriteBasis writes a basis file through the output lifecycle.
func WriteBasis(b *transform.Basis, path string, overwrite bool) error {
	// The inputs as every document beside an output names them: relative
	// to the basis file's folder (DocPaths).
	d := DocPaths{Dir: filepath.Dir(path)}
	for i := range b.Inputs {
		b.Inputs[i].Path = d.Input(b.Inputs[i].Path)
	}
	data, err := b.Marshal()
	if err != nil {
		return fmt.Errorf("write basis %s: %w", path, err)
	}
	return output.WriteFile(path, data, overwrite)
}

// Choose sets the number of kept components: k when given, else the fewest
// whose cumulative share of variance reaches fraction.
func Choose(b *transform.Basis, k int, fraction float64) {
	if k == 0 {
		k = transform.ComponentsFor(b.Eigenvalues, fraction)
	}
	b.Components = k
}
