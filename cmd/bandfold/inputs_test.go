package main

import (
	"fmt"
	"html"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"bandfold/raster"
)

// TestInputsOfTheWrongKind runs commands on inputs whose refusal issue 24
// asked for: each must exit with the code given, print one line naming the
// file and the problem, and write nothing. The fixtures are made here, so
// every expected message part is known by construction.
func TestInputsOfTheWrongKind(t *testing.T) {
	f := newFixtures(t)
	a := f.sceneA
	newBasis := f.path("out/new.basis.json")
	// A VRT of two complex bands over sceneA's bands 1 and 2, on its grid:
	// GDAL reads it as CFloat32 with a zero imaginary part.
	cx := f.path("complex.vrt")
	s, err := raster.Open([]string{a})
	if err != nil {
		t.Fatal(err)
	}
	gt := s.GeoTransform
	var bands strings.Builder
	fmt.Fprintf(&bands, "<SRS>%s</SRS><GeoTransform>%g,%g,%g,%g,%g,%g</GeoTransform>", html.EscapeString(s.Projection), gt[0], gt[1], gt[2], gt[3], gt[4], gt[5])
	for b := 1; b <= 2; b++ {
		fmt.Fprintf(&bands, `<VRTRasterBand dataType="CFloat32" band="%d"><SimpleSource><SourceFilename relativeToVRT="0">%s</SourceFilename><SourceBand>%d</SourceBand></SimpleSource></VRTRasterBand>`, b, a, b)
	}
	if err := os.WriteFile(cx, []byte(`<VRTDataset rasterXSize="40" rasterYSize="30">`+bands.String()+`</VRTDataset>`), 0o644); err != nil {
		t.Fatal(err)
	}
	// A UInt16 quality band on sceneA's grid (demo synth, band 1 used).
	qa := f.path("qa.tif")
	mustRun(t, "demo", "synth", "--width", "40", "--height", "30", "--bands", "2", "--type", "uint16", "--out", qa, "--quiet")
	// A file that exists but cannot be read (not when run as root, who
	// reads everything).
	unreadable := f.path("unreadable.txt")
	if err := os.WriteFile(unreadable, []byte("450 nm\n"), 0o000); err != nil {
		t.Fatal(err)
	}
	tests := []badCase{
		// Item 4: complex bands are refused, naming the band and file.
		{"learn complex", []string{"learn", cx, "--out", newBasis}, 2, []string{"band 1 of " + cx + " is complex (CFloat32): bandfold reads real values only"}},
		{"learn stack with a complex file", []string{"learn", a + "," + cx, "--out", newBasis}, 2, []string{cx, "is complex (CFloat32)"}},
		{"learn complex mask", []string{"learn", a, "--mask", cx, "--out", newBasis}, 2, []string{cx, "is complex"}},
		// Item 9: a bit rule the mask's type cannot hold is a usage
		// error, as is a missing file whatever flag names it.
		{"learn mask bit 16 of UInt16", []string{"learn", a, "--mask", qa + ":bits=16", "--out", newBasis}, 2, []string{qa, "bit 16", "16 bits", "UInt16"}},
		{"learn mask bits of Float32", []string{"learn", a, "--mask", f.nanScene + ":bits=0", "--out", newBasis}, 2, []string{f.nanScene, "bit rules need an integer band", "Float32"}},
		{"learn mask values of a missing file", []string{"learn", a, "--mask", f.missing + ":values=1", "--out", newBasis}, 2, []string{"--mask " + f.missing, "no such file"}},
		{"learn missing wavelengths", []string{"learn", a, "--wavelengths", f.missing, "--out", newBasis}, 2, []string{"--wavelengths " + f.missing, "no such file"}},
		{"learn wavelengths under a plain file", []string{"learn", a, "--wavelengths", filepath.Join(f.text, "w.txt"), "--out", newBasis}, 2, []string{filepath.Join(f.text, "w.txt"), "no such file"}},
		{"inspect missing basis", []string{"inspect", f.missing}, 2, []string{f.missing, "no such file"}},
		{"survey estimate missing survey", []string{"survey", "estimate", f.changeOut, f.missing}, 2, []string{f.missing, "no such file"}},
		{"survey draw missing folder", []string{"survey", "draw", f.missing, "--points", "10", "--out", f.path("out/s.gpkg")}, 2, []string{f.missing, "no such file"}},
	}
	if os.Geteuid() != 0 {
		tests = append(tests, badCase{"learn unreadable wavelengths", []string{"learn", a, "--wavelengths", unreadable, "--out", newBasis}, 2, []string{unreadable, "cannot be read", "permission denied"}})
	}
	checkBadCases(t, f.dir, tests)
}

// TestLongOutputName (issue 24, item 12): an output name that is legal but
// long (246 bytes) is written under that name; before, its temporary name
// passed 255 bytes and the write failed.
func TestLongOutputName(t *testing.T) {
	dir := t.TempDir()
	out := filepath.Join(dir, strings.Repeat("n", 242)+".tif")
	mustRun(t, "demo", "synth", "--width", "40", "--height", "30", "--bands", "3", "--out", out, "--quiet")
	entries, err := os.ReadDir(dir)
	if err != nil || len(entries) != 1 || entries[0].Name() != filepath.Base(out) {
		t.Errorf("folder holds %v (%v), want only %s", entries, err, filepath.Base(out))
	}
}
