package raster

import (
	"errors"
	"fmt"
	"math"
	"strings"
)

// calibrate records the calibration on every band and, for CalibrateTOA,
// finds each band's coefficients in its product's MTL file and sets Scale
// and Offset so that stored*Scale + Offset is the top-of-atmosphere
// reflectance (see Calibrate):
//
//	rho = (M_rho*Q_cal + A_rho) / sin(theta_SE)
//	    = Q_cal * M_rho/sin(theta_SE) + A_rho/sin(theta_SE)
//
// (USGS "Landsat 8 (L8) Data Users Handbook", "Conversion to TOA
// Reflectance"). The two forms differ by rounding only, a few units in the
// last place of the terms.
func (s *Stack) calibrate(mode string, read func(string) (*MTL, error)) error {
	for i := range s.Bands {
		s.Bands[i].Calibration = mode
	}
	if mode != CalibrateTOA {
		return nil
	}
	for i := range s.Bands {
		b := &s.Bands[i]
		m, err := findMTL(b.Path, read)
		if err != nil {
			return fmt.Errorf("calibrate band %s to TOA reflectance: %w", b.Name, err)
		}
		s.addSideFile(m.Path)
		if strings.HasPrefix(strings.ToUpper(m.ProcessingLevel), "L2") {
			return fmt.Errorf("calibrate band %s to TOA reflectance: %s describes a Level-2 product (%s); TOA reflectance is computed from Level-1 digital numbers",
				b.Name, m.Path, m.ProcessingLevel)
		}
		_, base := splitPath(b.Path)
		id, _ := m.BandOf(base)
		mult, add, err := m.Reflectance(id)
		switch {
		case errors.Is(err, errNoReflectance):
			return fmt.Errorf("calibrate band %s to TOA reflectance: %s has no reflectance coefficients (REFLECTANCE_MULT_BAND_%s) for its Landsat band %s, not a reflective band (thermal?); select the reflective bands with --bands",
				b.Name, m.Path, id, id)
		case err != nil:
			return fmt.Errorf("calibrate band %s to TOA reflectance: %w", b.Name, err)
		}
		if b.Index != 1 {
			return fmt.Errorf("calibrate band %s to TOA reflectance: %s lists %s as Landsat band %s, but this is its band %d",
				b.Name, m.Path, base, id, b.Index)
		}
		if !(m.SunElevation > 0 && m.SunElevation <= 90) {
			return fmt.Errorf("calibrate band %s to TOA reflectance: %s: SUN_ELEVATION = %g: the sun is not above the horizon",
				b.Name, m.Path, m.SunElevation)
		}
		sin := math.Sin(m.SunElevation * math.Pi / 180)
		b.ReflMult, b.ReflAdd, b.SunElevation = mult, add, m.SunElevation
		b.Scale, b.Offset = mult/sin, add/sin
	}
	return nil
}
