package jobtest

import (
	"path/filepath"
	"testing"

	"bandfold/cmd/bandfold/internal/fold"
	"bandfold/cmd/bandfold/internal/learn"
	"bandfold/raster"
	"bandfold/tiles"
)

// TestProvenanceCarried: outputs made band for band from an input keep its
// scenario name and date (issue 26): fold's components, unfold's restored
// bands and denoise's bands of the invented scene dated 2023-06-14 (known by
// construction: the demo writes ACQUISITION_DATE and SCENARIO).
func TestProvenanceCarried(t *testing.T) {
	dir := t.TempDir()
	f := ScenarioFiles(t, dir, 64, 2)
	comps, restored, denoised := derive(t, dir, f.Before, 3)
	src, err := raster.ReadMetadata(f.Before)
	if err != nil {
		t.Fatal(err)
	}
	for _, out := range []string{comps, restored, denoised} {
		md, err := raster.ReadMetadata(out)
		if err != nil {
			t.Fatal(err)
		}
		if md["SCENARIO"] == "" || md["SCENARIO"] != src["SCENARIO"] || md["ACQUISITION_DATE"] != "2023-06-14" {
			t.Errorf("%s: SCENARIO %q, ACQUISITION_DATE %q; want %q and 2023-06-14", filepath.Base(out), md["SCENARIO"], md["ACQUISITION_DATE"], src["SCENARIO"])
		}
	}
}

// TestWavelengthsCarried: the bands rebuilt by unfold and denoise from a
// basis of the invented hyperspectral cube carry the cube's wavelengths and
// widths (the basis records them), read back as GDAL's IMAGERY metadata
// (known by construction: the demo writes the cube's band centres).
func TestWavelengthsCarried(t *testing.T) {
	dir := t.TempDir()
	f := ScenarioFiles(t, dir, 128, 3)
	_, restored, denoised := derive(t, dir, f.Hyper, 5)
	cube, _, _ := ReadImage(t, f.Hyper, tiles.Tile{W: 1, H: 1})
	for _, out := range []string{restored, denoised} {
		s, _, _ := ReadImage(t, out, tiles.Tile{W: 1, H: 1})
		if s.Len() != cube.Len() {
			t.Fatalf("%s has %d bands, the cube %d", out, s.Len(), cube.Len())
		}
		for i, b := range s.Bands {
			want := cube.Bands[i]
			if want.WavelengthNM == 0 || b.WavelengthNM != want.WavelengthNM || b.FWHMNM != want.FWHMNM {
				t.Fatalf("%s band %d: %g nm wide %g, want %g nm wide %g", filepath.Base(out), i+1, b.WavelengthNM, b.FWHMNM, want.WavelengthNM, want.FWHMNM)
			}
		}
	}
}

// derive writes into dir what fold, unfold and denoise make of the image
// with a basis of k components fitted on it, and returns their paths.
func derive(t *testing.T, dir, image string, k int) (comps, restored, denoised string) {
	t.Helper()
	basis := filepath.Join(dir, "basis.json")
	Learn(t, TestEnv, learn.LearnOptions{Scenes: []string{image}, Out: basis, Components: k})
	comps, restored, denoised = filepath.Join(dir, "c.tif"), filepath.Join(dir, "r.tif"), filepath.Join(dir, "d.tif")
	Fold(t, TestEnv, fold.FoldOptions{Scenes: []string{image}, Basis: basis, Out: comps})
	if _, err := fold.Unfold(t.Context(), TestEnv, fold.UnfoldOptions{Components: comps, Basis: basis, Out: restored}); err != nil {
		t.Fatal(err)
	}
	if _, err := fold.Denoise(t.Context(), TestEnv, fold.DenoiseOptions{Image: image, Basis: basis, Out: denoised}); err != nil {
		t.Fatal(err)
	}
	return comps, restored, denoised
}
