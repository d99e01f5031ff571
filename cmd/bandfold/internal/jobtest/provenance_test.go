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
	basis := filepath.Join(dir, "b.json")
	Learn(t, TestEnv, learn.LearnOptions{Scenes: []string{f.Before}, Out: basis, Components: 3})
	comps := filepath.Join(dir, "c.tif")
	Fold(t, TestEnv, fold.FoldOptions{Scenes: []string{f.Before}, Basis: basis, Out: comps})
	restored := filepath.Join(dir, "r.tif")
	if _, err := fold.Unfold(t.Context(), TestEnv, fold.UnfoldOptions{Components: comps, Basis: basis, Out: restored}); err != nil {
		t.Fatal(err)
	}
	denoised := filepath.Join(dir, "d.tif")
	if _, err := fold.Denoise(t.Context(), TestEnv, fold.DenoiseOptions{Image: f.Before, Basis: basis, Out: denoised}); err != nil {
		t.Fatal(err)
	}
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
	basis := filepath.Join(dir, "h.json")
	Learn(t, TestEnv, learn.LearnOptions{Scenes: []string{f.Hyper}, Out: basis, Components: 5})
	comps := filepath.Join(dir, "c.tif")
	Fold(t, TestEnv, fold.FoldOptions{Scenes: []string{f.Hyper}, Basis: basis, Out: comps})
	restored, denoised := filepath.Join(dir, "r.tif"), filepath.Join(dir, "d.tif")
	if _, err := fold.Unfold(t.Context(), TestEnv, fold.UnfoldOptions{Components: comps, Basis: basis, Out: restored}); err != nil {
		t.Fatal(err)
	}
	if _, err := fold.Denoise(t.Context(), TestEnv, fold.DenoiseOptions{Image: f.Hyper, Basis: basis, Out: denoised}); err != nil {
		t.Fatal(err)
	}
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
