package raster

import (
	"strconv"
	"strings"

	"github.com/airbusgeo/godal"
)

// bandWavelength reads a band's centre wavelength and full width at half
// maximum, in nanometres (0 when unknown), from its GDAL metadata: the
// IMAGERY-domain items CENTRAL_WAVELENGTH_UM and FWHM_UM (GDAL's standard
// for imagery, in micrometres), else the default-domain items wavelength,
// fwhm and wavelength_units that GDAL's ENVI driver (and other
// header-plus-binary formats) reports, with units "nm", "um" or their
// spelled-out forms ("Nanometers", "Micrometers"); without a unit, a value
// below 100 is taken as micrometres, as no band centre is a fraction of a
// micrometre in nanometres.
func bandWavelength(b godal.Band) (centre, fwhm float64) {
	if c, ok := metaFloat(b, "CENTRAL_WAVELENGTH_UM", "IMAGERY"); ok && c > 0 {
		w, _ := metaFloat(b, "FWHM_UM", "IMAGERY")
		return c * 1000, w * 1000
	}
	c, ok := metaFloat(b, "wavelength", "")
	if !ok || !(c > 0) {
		return 0, 0
	}
	w, _ := metaFloat(b, "fwhm", "")
	f := unitFactor(b.Metadata("wavelength_units"), c)
	return c * f, w * f
}

// metaFloat reads a numeric metadata item of b in domain (the default one
// when empty).
func metaFloat(b godal.Band, key, domain string) (float64, bool) {
	var v string
	if domain == "" {
		v = b.Metadata(key)
	} else {
		v = b.Metadata(key, godal.Domain(domain))
	}
	f, err := strconv.ParseFloat(strings.TrimSpace(v), 64)
	if err != nil || f != f {
		return 0, false
	}
	return f, true
}

// unitFactor turns a wavelength_units item into a factor to nanometres.
func unitFactor(unit string, v float64) float64 {
	switch strings.ToLower(strings.TrimSpace(unit)) {
	case "nm", "nanometer", "nanometers", "nanometre", "nanometres":
		return 1
	case "um", "µm", "micrometer", "micrometers", "micrometre", "micrometres", "micron", "microns":
		return 1000
	case "mm", "millimeter", "millimeters":
		return 1e6
	}
	if v < 100 {
		return 1000
	}
	return 1
}

// Wavelengths returns the centre wavelengths of the stack's bands in
// nanometres, or nil unless every band has one.
func (s *Stack) Wavelengths() []float64 {
	out := make([]float64, len(s.Bands))
	for i, b := range s.Bands {
		if !(b.WavelengthNM > 0) {
			return nil
		}
		out[i] = b.WavelengthNM
	}
	return out
}
