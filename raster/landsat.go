package raster

import (
	"fmt"
	"path/filepath"
	"regexp"
	"slices"
	"strings"
)

// SpectralRange is the nominal spectral range of a product band: its lower
// and upper band edges in nanometres and its common name.
type SpectralRange struct {
	Name   string
	LoNM   float64
	HiNM   float64
	Sensor string
}

// CentreNM is the middle of the range.
func (r SpectralRange) CentreNM() float64 { return (r.LoNM + r.HiNM) / 2 }

// landsatBands are the nominal band edges of the Landsat sensors, by
// SPACECRAFT_ID and the band id of FILE_NAME_BAND_n, in nanometres.
//
// Sources (values from the handbooks' band tables; the Landsat 7 edges are
// from memory of that table and agree with the 775-900 nm NIR band the
// change-of-sensor checks rely on):
//   - Landsat 4-5 TM: USGS "Landsat 4-5 Thematic Mapper (TM) Level 1 Data
//     Format Control Book" and "Landsat 4-7 Surface Reflectance Product
//     Guide", band designations;
//   - Landsat 7 ETM+: USGS "Landsat 7 (L7) Data Users Handbook", section 2,
//     ETM+ spectral bands;
//   - Landsat 8 OLI/TIRS and Landsat 9 OLI-2/TIRS-2: USGS "Landsat 8 (L8)
//     Data Users Handbook" (table "OLI and TIRS spectral bands") and
//     "Landsat 9 Data Users Handbook" (the same nominal edges).
var landsatBands = map[string]map[string]SpectralRange{
	"TM": {
		"1": {"blue", 450, 520, ""}, "2": {"green", 520, 600, ""}, "3": {"red", 630, 690, ""},
		"4": {"nir", 760, 900, ""}, "5": {"swir16", 1550, 1750, ""}, "6": {"lwir", 10400, 12500, ""},
		"7": {"swir22", 2080, 2350, ""},
	},
	"ETM": {
		"1": {"blue", 450, 515, ""}, "2": {"green", 525, 605, ""}, "3": {"red", 630, 690, ""},
		"4": {"nir", 775, 900, ""}, "5": {"swir16", 1550, 1750, ""},
		"6_VCID_1": {"lwir", 10400, 12500, ""}, "6_VCID_2": {"lwir", 10400, 12500, ""},
		"7": {"swir22", 2080, 2350, ""}, "8": {"pan", 520, 900, ""},
	},
	"OLI": {
		"1": {"coastal", 435, 451, ""}, "2": {"blue", 452, 512, ""}, "3": {"green", 533, 590, ""},
		"4": {"red", 636, 673, ""}, "5": {"nir08", 851, 879, ""}, "6": {"swir16", 1566, 1651, ""},
		"7": {"swir22", 2107, 2294, ""}, "8": {"pan", 503, 676, ""}, "9": {"cirrus", 1363, 1384, ""},
		"10": {"lwir11", 10600, 11190, ""}, "11": {"lwir12", 11500, 12510, ""},
	},
}

// sensorFamily maps SPACECRAFT_ID and SENSOR_ID to a key of landsatBands:
// TM on Landsat 4 and 5, ETM+ on Landsat 7, OLI(-2)/TIRS(-2) on Landsat 8
// and 9. Unknown pairs give "".
func sensorFamily(spacecraft, sensor string) string {
	sc, sn := strings.ToUpper(spacecraft), strings.ToUpper(sensor)
	switch {
	case (sc == "LANDSAT_4" || sc == "LANDSAT_5") && sn == "TM":
		return "TM"
	case sc == "LANDSAT_7" && strings.HasPrefix(sn, "ETM"):
		return "ETM"
	case (sc == "LANDSAT_8" || sc == "LANDSAT_9") && (strings.HasPrefix(sn, "OLI") || strings.HasPrefix(sn, "TIRS")):
		return "OLI"
	}
	return ""
}

// LandsatBand returns the nominal spectral range of band id (as
// FILE_NAME_BAND_n names it: "1" ... "11", "6_VCID_1") of the sensor the
// MTL names (SPACECRAFT_ID, SENSOR_ID).
func (m *MTL) LandsatBand(id string) (SpectralRange, bool) {
	fam := sensorFamily(m.SpacecraftID, m.SensorID)
	r, ok := landsatBands[fam][id]
	if ok {
		r.Sensor = m.Sensor()
	}
	return r, ok
}

// Sensor names the spacecraft and sensor for people: "LANDSAT_7 ETM".
func (m *MTL) Sensor() string {
	return strings.TrimSpace(m.SpacecraftID + " " + m.SensorID)
}

// spectral fills in each band's spectral range: from its centre and FWHM
// metadata when it has them, else, for a Landsat band file listed in the
// product's *_MTL.txt beside it, from the sensor's band table. Files with
// no MTL are left as they are; an MTL that cannot be read only leaves the
// band without a range.
func (s *Stack) spectral(read func(string) (*MTL, error), readS2 func(string) (*S2Metadata, error)) {
	for i := range s.Bands {
		b := &s.Bands[i]
		if b.WavelengthNM > 0 {
			b.Range = SpectralRange{LoNM: b.WavelengthNM - b.FWHMNM/2, HiNM: b.WavelengthNM + b.FWHMNM/2}
			continue
		}
		if s.s2Spectral(b, readS2) {
			continue
		}
		if b.Index != 1 || !landsatBandName.MatchString(filepath.Base(b.Path)) {
			continue // a Landsat band file holds one band, and is named so
		}
		m, err := findMTL(b.Path, read)
		if err != nil {
			continue
		}
		_, base := splitPath(b.Path)
		id, _ := m.BandOf(base)
		s.addSideFile(m.Path)
		if r, ok := m.LandsatBand(id); ok {
			b.Range, b.Product = r, fmt.Sprintf("%s band %s", m.Sensor(), id)
			b.WavelengthNM, b.FWHMNM = r.CentreNM(), r.HiNM-r.LoNM
		}
	}
}

// landsatBandName matches the names of Landsat band files ("..._B4.TIF",
// "..._SR_B4.TIF", "..._B6_VCID_1.TIF"): only beside those is an MTL looked
// for, so that other rasters (remote ones above all) never cost a folder
// listing.
var landsatBandName = regexp.MustCompile(`(?i)_B[0-9]+(_VCID_[12])?\.TIF+$`)

// mtlCache reads each MTL file once.
func mtlCache() func(string) (*MTL, error) {
	cache := map[string]*MTL{}
	return func(p string) (*MTL, error) {
		if m, ok := cache[p]; ok {
			return m, nil
		}
		m, err := ReadMTL(p)
		if err == nil {
			cache[p] = m
		}
		return m, err
	}
}

// addSideFile records a file the stack reads besides its bands.
func (s *Stack) addSideFile(p string) {
	if !slices.Contains(s.sideFiles, p) {
		s.sideFiles = append(s.sideFiles, p)
	}
}

// SideFiles are the files the stack read besides its bands and masks: the
// products' metadata (*_MTL.txt). A run must not write over them.
func (s *Stack) SideFiles() []string { return slices.Clone(s.sideFiles) }
