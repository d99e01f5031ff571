package raster

import (
	"fmt"
	"path/filepath"
	"testing"

	"github.com/airbusgeo/godal"
)

// TestBandWavelengths: metadata written with GDAL itself is read back in
// nanometres; the expected values are the written numbers times the unit
// factor (1 nm, 1000 nm per um, by definition).
func TestBandWavelengths(t *testing.T) {
	for _, tc := range []struct {
		name   string
		set    func(b godal.Band) error
		centre float64
		fwhm   float64
	}{
		{"default domain nm", func(b godal.Band) error {
			return setAll(b, "", "wavelength", "550.5", "wavelength_units", "Nanometers", "fwhm", "10")
		}, 550.5, 10},
		{"default domain um", func(b godal.Band) error {
			return setAll(b, "", "wavelength", "0.65", "wavelength_units", "um", "fwhm", "0.01")
		}, 650, 10},
		{"IMAGERY domain", func(b godal.Band) error {
			return setAll(b, "IMAGERY", "CENTRAL_WAVELENGTH_UM", "2.2", "FWHM_UM", "0.05")
		}, 2200, 50},
		{"none", func(godal.Band) error { return nil }, 0, 0},
	} {
		path := filepath.Join(t.TempDir(), "w.tif")
		ds, err := godal.Create(godal.GTiff, path, 2, godal.Float32, 4, 3)
		if err != nil {
			t.Fatal(err)
		}
		if err := tc.set(ds.Bands()[1]); err != nil {
			t.Fatal(err)
		}
		if err := ds.Close(); err != nil {
			t.Fatal(err)
		}
		s, err := Open([]string{path})
		if err != nil {
			t.Fatal(err)
		}
		b := s.Bands[1]
		if !nearNM(b.WavelengthNM, tc.centre) || !nearNM(b.FWHMNM, tc.fwhm) {
			t.Errorf("%s: centre %v fwhm %v, want %v and %v", tc.name, b.WavelengthNM, b.FWHMNM, tc.centre, tc.fwhm)
		}
		if s.Wavelengths() != nil {
			t.Errorf("%s: band 1 has no wavelength, so the stack has none, got %v", tc.name, s.Wavelengths())
		}
		s.Close()
	}
}

func nearNM(a, b float64) bool { return a == b || (a-b)*(a-b) <= 1e-24*b*b }

func setAll(b godal.Band, domain string, kv ...string) error {
	for i := 0; i < len(kv); i += 2 {
		var err error
		if domain == "" {
			err = b.SetMetadata(kv[i], kv[i+1])
		} else {
			err = b.SetMetadata(kv[i], kv[i+1], godal.Domain(domain))
		}
		if err != nil {
			return err
		}
	}
	return nil
}

// TestCreateWavelengths (issue 26): wavelengths written through
// Spec.Wavelengths land in GDAL's IMAGERY domain as CENTRAL_WAVELENGTH_UM
// and FWHM_UM (micrometres; for a COG in the .aux.xml beside it), as
// GDAL's own gdalinfo -json reports them,
// with nothing under the default-domain keys of ENVI headers, and are read
// back by Open in nanometres (known by construction: the written numbers,
// 1000 nm per um by definition).
func TestCreateWavelengths(t *testing.T) {
	for _, tc := range []struct {
		name   string
		w      []Wavelength
		centre []string // CENTRAL_WAVELENGTH_UM per band, "" for none
		fwhm   []string
		want   []float64 // Stack.Wavelengths
	}{
		{"centre and width", []Wavelength{{450, 10}, {2400.5, 12.25}}, []string{"0.45", "2.4005"}, []string{"0.01", "0.01225"}, []float64{450, 2400.5}},
		{"centre only", []Wavelength{{865, 0}, {1610, 0}}, []string{"0.865", "1.61"}, []string{"", ""}, []float64{865, 1610}},
		{"none", nil, []string{"", ""}, []string{"", ""}, nil},
	} {
		for _, format := range []Format{GTiff, COG} {
			path := filepath.Join(t.TempDir(), "m.tif")
			writeZeros(t, path, Spec{Grid: Grid{Width: 4, Height: 3}, Bands: 2, DataType: "Int16", Wavelengths: tc.w, Format: format})
			what := fmt.Sprintf("%s (%s)", tc.name, format)
			for i, band := range gdalinfo(t, path)["bands"].([]any) {
				md, _ := band.(map[string]any)["metadata"].(map[string]any)
				img, _ := md["IMAGERY"].(map[string]any)
				if got, _ := img["CENTRAL_WAVELENGTH_UM"].(string); got != tc.centre[i] {
					t.Errorf("%s band %d: CENTRAL_WAVELENGTH_UM %q, want %q", what, i+1, got, tc.centre[i])
				}
				if got, _ := img["FWHM_UM"].(string); got != tc.fwhm[i] {
					t.Errorf("%s band %d: FWHM_UM %q, want %q", what, i+1, got, tc.fwhm[i])
				}
				if def, _ := md[""].(map[string]any); def["wavelength"] != nil || def["wavelength_units"] != nil {
					t.Errorf("%s band %d: default-domain wavelength items %v", what, i+1, def)
				}
			}
			s, err := Open([]string{path})
			if err != nil {
				t.Fatal(err)
			}
			got := s.Wavelengths()
			s.Close()
			if len(got) != len(tc.want) {
				t.Fatalf("%s: wavelengths %v, want %v", what, got, tc.want)
			}
			for i := range got {
				if !nearNM(got[i], tc.want[i]) {
					t.Errorf("%s: band %d at %v nm, want %v", what, i+1, got[i], tc.want[i])
				}
			}
		}
	}
}
