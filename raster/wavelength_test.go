package raster

import (
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

// TestCreateBandMetadata: wavelengths written through Spec.BandMetadata are
// read back by Open (known by construction: the written numbers).
func TestCreateBandMetadata(t *testing.T) {
	for _, tc := range []struct {
		name string
		meta []map[string]string
		want []float64
	}{
		{"nm", []map[string]string{{"wavelength": "450", "wavelength_units": "nm"}, {"wavelength": "2400.5", "wavelength_units": "nm"}}, []float64{450, 2400.5}},
		{"um", []map[string]string{{"wavelength": "0.45", "wavelength_units": "um"}, {"wavelength": "2.4", "wavelength_units": "um"}}, []float64{450, 2400}},
		{"none", nil, nil},
	} {
		path := filepath.Join(t.TempDir(), "m.tif")
		o, err := Create(path, Spec{Grid: Grid{Width: 4, Height: 3}, Bands: 2, DataType: "Int16", BandMetadata: tc.meta})
		if err != nil {
			t.Fatal(err)
		}
		if err := o.Finish(); err != nil {
			t.Fatal(err)
		}
		if err := o.Commit(); err != nil {
			t.Fatal(err)
		}
		s, err := Open([]string{path})
		if err != nil {
			t.Fatal(err)
		}
		got := s.Wavelengths()
		s.Close()
		if len(got) != len(tc.want) {
			t.Fatalf("%s: wavelengths %v, want %v", tc.name, got, tc.want)
		}
		for i := range got {
			if !nearNM(got[i], tc.want[i]) {
				t.Errorf("%s: band %d at %v nm, want %v", tc.name, i+1, got[i], tc.want[i])
			}
		}
	}
}
