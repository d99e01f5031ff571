package transform

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"
)

// Excluded records a band left out before fitting: its 1-based number in
// the input stack, its name, its centre wavelength in nanometres (0 when
// unknown) and why it was dropped ("--exclude", "--exclude-nm").
type Excluded struct {
	Band         int     `json:"band"`
	Name         string  `json:"name"`
	WavelengthNM float64 `json:"wavelength_nm,omitempty"`
	Reason       string  `json:"reason"`
}

// checkVersion checks the version and the members later versions add:
// version 1 files carry none of them; version 2 and 3 ones name their
// method, an MNF basis carries a p×p noise covariance and its pair count,
// wavelengths (when given) are one per band, finite, positive and
// increasing; only version 3 has source bands, one number per band.
func (b *Basis) checkVersion() error {
	p := len(b.Bands)
	switch b.Version {
	case 1:
		if b.Method != "" || b.NoiseCovariance != nil || b.NoisePairs != 0 || b.WavelengthsNM != nil || b.Excluded != nil || b.SourceBands != nil {
			return fmt.Errorf("version 1 with members of later versions (method, noise_covariance, noise_pairs, wavelengths_nm, excluded, source_bands)")
		}
		return nil
	case 2:
		if b.SourceBands != nil {
			return fmt.Errorf("version 2 with source_bands, a version 3 member")
		}
	case 3:
		if b.SourceBands != nil {
			if err := b.SourceBands.check(p); err != nil {
				return err
			}
		}
	default:
		return fmt.Errorf("%w %d", ErrUnknownVersion, b.Version)
	}
	switch b.Method {
	case PCA:
		if b.NoiseCovariance != nil && len(b.NoiseCovariance) != p {
			return fmt.Errorf("noise_covariance has %d rows for %d bands", len(b.NoiseCovariance), p)
		}
	case MNF:
		if b.NoiseCovariance == nil {
			return errNeedsNoise
		}
		if b.NoisePairs < 2 {
			return fmt.Errorf("noise_pairs %d: a noise covariance needs at least 2", b.NoisePairs)
		}
		if b.Mode != Covariance {
			return fmt.Errorf("method mnf in %s mode (MNF is invariant to band scaling; use covariance)", b.Mode)
		}
	default:
		return fmt.Errorf("unknown method %q", b.Method)
	}
	if b.WavelengthsNM != nil {
		if err := CheckWavelengths(b.WavelengthsNM, p); err != nil {
			return fmt.Errorf("wavelengths_nm: %w", err)
		}
	}
	for i, e := range b.Excluded {
		if e.Band < 1 || e.Reason == "" || !finite(e.WavelengthNM) {
			return fmt.Errorf("excluded[%d]: band %d, reason %q", i, e.Band, e.Reason)
		}
	}
	return nil
}

// CheckWavelengths checks p band centre wavelengths: exactly p of them,
// finite, positive and strictly increasing.
func CheckWavelengths(w []float64, p int) error {
	if len(w) != p {
		return fmt.Errorf("%d wavelengths for %d bands", len(w), p)
	}
	for i, v := range w {
		switch {
		case !finite(v) || v <= 0:
			return fmt.Errorf("wavelength %d is %v", i+1, v)
		case i > 0 && !(v > w[i-1]):
			return fmt.Errorf("wavelengths are not increasing at band %d (%v after %v)", i+1, v, w[i-1])
		}
	}
	return nil
}

// NewMNFBasis fits a minimum noise fraction basis (DecomposeMNF) to band
// statistics as NewBasis does, with noise the shift-difference noise
// covariance estimated from pairs pixel pairs (bands.NoiseCovariance). The
// basis is in covariance mode; its eigenvalues are λ of Σ a = λ Σ_N a,
// clamped at zero like NewBasis's, and its eigenvectors the columns of A
// (Aᵀ Σ_N A = I). A noise covariance that is not positive definite is a
// *NotDefiniteError.
func NewMNFBasis(bs []Band, count int64, mean []float64, cov, noise mat.Symmetric, pairs int64) (*Basis, error) {
	b, err := newMoments(bs, count, mean, cov)
	if err != nil {
		return nil, err
	}
	d, err := DecomposeMNF(cov, noise)
	if err != nil {
		return nil, err
	}
	p := len(bs)
	b.Method = MNF
	b.NoisePairs = pairs
	b.NoiseCovariance = make([][]float64, p)
	for i := range p {
		b.NoiseCovariance[i] = make([]float64, p)
		for j := range p {
			b.NoiseCovariance[i][j] = noise.At(i, j)
		}
	}
	if err := b.setDecomposition(d, "covariance matrix", "generalised eigenvalue"); err != nil {
		return nil, err
	}
	return b, nil
}

// newMoments builds the descriptive part of a covariance-mode version 2
// basis (everything but the decomposition) through NewBasis's checks,
// without its eigendecomposition of the covariance, which the caller's
// decomposition replaces.
func newMoments(bs []Band, count int64, mean []float64, cov mat.Symmetric) (*Basis, error) {
	b, err := newStats(Covariance, bs, count, mean, cov)
	if err != nil {
		return nil, err
	}
	for _, s := range b.StdDev {
		if math.IsNaN(s) {
			return nil, fmt.Errorf("stddev is NaN")
		}
	}
	return b, nil
}
