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

// ErrTooLarge is wrapped by the errors of statistics whose sums overflowed
// the float64 range: values of about 1e154 or more, whose squares pass
// 1.8e308, make a co-moment infinite and then NaN. The caller adds the
// file the values came from.
var ErrTooLarge = errors.New("the values are too large to sum (their squares pass the float64 range)")

// Err returns an error wrapping ErrTooLarge when the accumulated mean or
// co-moment is infinite or NaN, nil otherwise. Check it once the last
// pixels are added, and wrap it with the file they came from.
func (a *Accumulator) Err() error {
	if !allFinite(a.mean) || !allFinite(a.com) {
		return ErrTooLarge
	}
	return nil
}

// allFinite reports whether every value of v is finite.
func allFinite(v []float64) bool {
	for _, x := range v {
		if x-x != 0 { // NaN or infinite
			return false
		}
	}
	return true
}
