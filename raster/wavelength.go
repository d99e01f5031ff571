package raster

import (
	"slices"
	"strconv"
	"strings"

	"github.com/airbusgeo/godal"
)

// Wavelength is a band's centre wavelength and full width at half maximum
// in nanometres (0 when unknown). An output band's are written in GDAL's
// convention for imagery: the IMAGERY-domain items CENTRAL_WAVELENGTH_UM
// and FWHM_UM, in micrometres, which GDAL's own drivers (ENVI, Sentinel-2,
// ...) fill and GDAL-based tools read; not the default-domain wavelength,
// fwhm and wavelength_units of ENVI headers, which bandfold still reads.
type Wavelength struct {
	CentreNM, FWHMNM float64
}

// imageryDomain is GDAL's metadata domain for imagery.
const imageryDomain = "IMAGERY"

// set writes w into band b's IMAGERY domain; an unknown value is left out.
func (w Wavelength) set(b godal.Band) error {
	for _, item := range []struct {
		key string
		nm  float64
	}{{"CENTRAL_WAVELENGTH_UM", w.CentreNM}, {"FWHM_UM", w.FWHMNM}} {
		if !(item.nm > 0) {
			continue
		}
		um := strconv.FormatFloat(item.nm/1000, 'g', 12, 64)
		if err := b.SetMetadata(item.key, um, godal.Domain(imageryDomain), errLogger); err != nil {
			return err
		}
	}
	return nil
}

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
	if c, ok := metaFloat(b, "CENTRAL_WAVELENGTH_UM", imageryDomain); ok && c > 0 {
		w, _ := metaFloat(b, "FWHM_UM", imageryDomain)
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

// auxWavelengths fills in the wavelengths of the bands of the local file
// path that have none from the .aux.xml beside it, where bandfold keeps a
// COG's (Output.keepWavelengths). A file without one is not opened again.
func auxWavelengths(path string, bands []Band) {
	if IsVirtual(path) || !slices.ContainsFunc(bands, func(b Band) bool { return !(b.WavelengthNM > 0) }) {
		return
	}
	if _, ok := AuxSidecar(path); !ok {
		return
	}
	ds, err := openWithAux(path)
	if err != nil {
		return
	}
	defer ds.Close(errLogger)
	for i, b := range ds.Bands() {
		if i < len(bands) && !(bands[i].WavelengthNM > 0) {
			bands[i].WavelengthNM, bands[i].FWHMNM = bandWavelength(b)
		}
	}
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
