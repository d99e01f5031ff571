package series

import (
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/transform/change"
)

// The values of --normalize.
const (
	NormalizeStable = "stable"
	NormalizeNone   = "none"
)

// NormalizationSummary is the relative radiometric normalisation of a date
// onto the reference date's scale (AFTER onto BEFORE for change).
type NormalizationSummary struct {
	Method string `json:"method"`
	// Rule states how the stable pixels were chosen.
	Rule         string `json:"rule,omitempty"`
	StablePixels int    `json:"stable_pixels"`
	// Applied is false when the fit was refused (a band's correlation over
	// the stable pixels below minCorrelation, or a gain not positive).
	Applied bool `json:"applied"`
	// Rounds is the number of refinements of the stable pixels after the
	// first fit (change.FitNormalization).
	Rounds int              `json:"rounds"`
	Bands  []BandNormalized `json:"bands"`
}

// BandNormalized is one band's normalisation: after' = offset + gain x
// after, with the correlation of the dates over the stable pixels.
type BandNormalized struct {
	Band int `json:"band"`
	change.BandFit
}

// normalizations are the values --normalize takes.
var normalizations = []string{NormalizeStable, NormalizeNone}

// checkNormalize checks and defaults a --normalize value in place.
func checkNormalize(value *string) error {
	var err error
	*value, err = ParseNormalize(*value)
	return err
}

// ParseNormalize checks a --normalize value; empty is the default, stable.
func ParseNormalize(s string) (string, error) {
	if s == "" {
		return NormalizeStable, nil
	}
	if !jobkit.Contains(normalizations, s) {
		return s, jobkit.Usagef("--normalize %q: want stable or none", s)
	}
	return s, nil
}
