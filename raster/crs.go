package raster

import (
	"fmt"

	"github.com/airbusgeo/godal"
)

// FromPROJ returns the WKT of the CRS described by a PROJ string, such as a
// custom projection of invented data.
func FromPROJ(proj string) (string, error) {
	sr, err := godal.NewSpatialRefFromProj4(proj, errLogger)
	if err != nil {
		return "", fmt.Errorf("CRS %q: %w", proj, err)
	}
	defer sr.Close()
	return sr.WKT(errLogger)
}
