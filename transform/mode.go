package transform

import "fmt"

// Mode selects the matrix a basis is decomposed from.
type Mode string

const (
	// Covariance decomposes the band covariance matrix: bands keep their
	// units, so bands with a large variance dominate the leading components.
	Covariance Mode = "covariance"
	// Correlation decomposes the band correlation matrix, that is the
	// covariance of the bands standardised to unit variance, so every band
	// weighs the same whatever its units or gain.
	Correlation Mode = "correlation"
)

// ParseMode returns the Mode named s ("covariance" or "correlation").
func ParseMode(s string) (Mode, error) {
	switch m := Mode(s); m {
	case Covariance, Correlation:
		return m, nil
	}
	return "", fmt.Errorf("unknown mode %q (want %q or %q)", s, Covariance, Correlation)
}

func (m Mode) valid() bool { return m == Covariance || m == Correlation }
