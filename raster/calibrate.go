package raster

import (
	"errors"
	"fmt"
	"math"
	"strings"
)

// calibrate records the calibration on every band and, for CalibrateTOA
// and CalibrateReflectance, finds each band's coefficients in its
// product's metadata and sets Scale and Offset so that stored*Scale +
// Offset is the reflectance (see Calibrate).
func (s *Stack) calibrate(mode string, read func(string) (*MTL, error), readS2 func(string) (*S2Metadata, error)) error {
	for i := range s.Bands {
		s.Bands[i].Calibration = mode
	}
	for i := range s.Bands {
		b := &s.Bands[i]
		var err error
		switch mode {
		case CalibrateTOA:
			err = s.landsatReflectance(b, read, false)
		case CalibrateReflectance:
			err = s.productReflectance(b, read, readS2)
		}
		if err != nil {
			what := map[string]string{CalibrateTOA: "TOA reflectance", CalibrateReflectance: "reflectance"}[mode]
			return fmt.Errorf("calibrate band %s to %s: %w", b.Name, what, err)
		}
	}
	return nil
}

// productReflectance calibrates b to the reflectance its product defines:
// bottom-of-atmosphere for a Sentinel-2 Level-2A band file, surface
// reflectance for a Landsat Collection 2 Level-2 one, TOA for Landsat
// Level 1.
func (s *Stack) productReflectance(b *Band, read func(string) (*MTL, error), readS2 func(string) (*S2Metadata, error)) error {
	m, ok, err := FindS2Metadata(b.Path, readS2)
	switch {
	case err != nil:
		return err
	case ok:
		s.addSideFile(m.Path)
		return s2Reflectance(b, m)
	case !landsatBandName.MatchString(b.Path):
		return fmt.Errorf("no product metadata gives reflectance coefficients for %s (a Landsat *_MTL.txt beside it that lists it, or a Sentinel-2 %s above it); --calibrate scale applies the file's own scale and offset",
			b.Path, S2MetadataName)
	}
	return s.landsatReflectance(b, read, true)
}

// s2Reflectance sets b's scale and offset from its product's metadata:
//
//	rho = (DN + BOA_ADD_OFFSET) / BOA_QUANTIFICATION_VALUE
//
// (Sentinel-2 Level-2A product format, processing baseline 04.00 and
// later; an offset of 0 before it).
func s2Reflectance(b *Band, m *S2Metadata) error {
	name, _, _ := S2FileBand(b.Path)
	band, ok := m.Bands[name]
	if !ok {
		return fmt.Errorf("%s is the %s layer of %s, not a reflectance band", b.Path, name, m.Path)
	}
	if b.Index != 1 {
		return fmt.Errorf("%s: a Sentinel-2 band file holds one band, but this is its band %d", b.Path, b.Index)
	}
	b.Scale, b.Offset = 1/m.Quantification, band.Offset/m.Quantification
	return nil
}

// landsatReflectance sets b's scale and offset from its product's MTL:
// top-of-atmosphere reflectance from Level-1 digital numbers,
//
//	rho = (M_rho*Q_cal + A_rho) / sin(theta_SE)
//	    = Q_cal * M_rho/sin(theta_SE) + A_rho/sin(theta_SE)
//
// (USGS "Landsat 8 (L8) Data Users Handbook", "Conversion to TOA
// Reflectance"; the two forms differ by rounding only), or, when level2 is
// set and the MTL describes a Level-2 product, surface reflectance
// rho = M*Q + A with the LEVEL2_SURFACE_REFLECTANCE_PARAMETERS group's
// coefficients (USGS "Landsat 8-9 Collection 2 Level 2 Science Product
// Guide", "Surface Reflectance": 2.75e-05 and -0.2 in today's products).
func (s *Stack) landsatReflectance(b *Band, read func(string) (*MTL, error), level2 bool) error {
	m, err := findMTL(b.Path, read)
	if err != nil {
		return err
	}
	s.addSideFile(m.Path)
	isL2 := strings.HasPrefix(strings.ToUpper(m.ProcessingLevel), "L2")
	if isL2 && !level2 {
		return fmt.Errorf("%s describes a Level-2 product (%s); TOA reflectance is computed from Level-1 digital numbers (--calibrate reflectance gives the product's surface reflectance)",
			m.Path, m.ProcessingLevel)
	}
	_, base := splitPath(b.Path)
	id, _ := m.BandOf(base)
	coefficients, group := m.Reflectance, "REFLECTANCE_MULT_BAND_"
	if isL2 {
		coefficients, group = m.SurfaceReflectance, "LEVEL2_SURFACE_REFLECTANCE_PARAMETERS REFLECTANCE_MULT_BAND_"
	}
	mult, add, err := coefficients(id)
	switch {
	case errors.Is(err, errNoReflectance):
		return fmt.Errorf("%s has no reflectance coefficients (%s%s) for its Landsat band %s, not a reflective band (thermal or quality?); select the reflective bands with --bands",
			m.Path, group, id, id)
	case err != nil:
		return err
	}
	if b.Index != 1 {
		return fmt.Errorf("%s lists %s as Landsat band %s, but this is its band %d", m.Path, base, id, b.Index)
	}
	b.ReflMult, b.ReflAdd = mult, add
	if isL2 {
		b.Scale, b.Offset = mult, add
		return nil
	}
	if !(m.SunElevation > 0 && m.SunElevation <= 90) {
		return fmt.Errorf("%s: SUN_ELEVATION = %g: the sun is not above the horizon", m.Path, m.SunElevation)
	}
	sin := math.Sin(m.SunElevation * math.Pi / 180)
	b.SunElevation = m.SunElevation
	b.Scale, b.Offset = mult/sin, add/sin
	return nil
}
