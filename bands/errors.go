package bands

import (
	"errors"
	"fmt"
)

// ErrZeroVariance is wrapped by the errors of statistics that divide by a
// band's variance when that variance is zero.
var ErrZeroVariance = errors.New("zero variance")

// ZeroVarianceError reports a band with zero variance. Band is the 0-based
// band index, so that callers can print the band's name.
type ZeroVarianceError struct {
	Band int
}

func (e *ZeroVarianceError) Error() string {
	return fmt.Sprintf("bands: band %d has zero variance", e.Band)
}

// Unwrap returns ErrZeroVariance.
func (e *ZeroVarianceError) Unwrap() error { return ErrZeroVariance }

// ErrInvalidState is wrapped by the errors FromState returns for a malformed
// State.
var ErrInvalidState = errors.New("invalid state")
