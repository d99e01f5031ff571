package main

import (
	"os"
	"path/filepath"
	"testing"

	"bandfold/raster"
	"bandfold/tiles"
)

// TestTimelineBadInputs runs timeline on the bad input of its issue, as
// TestBadInputs does for the other commands: exit 2 for a malformed option
// value or argument count, 1 for files whose data are wrong; exactly one
// line on stderr, "bandfold: ...", naming the file or flag and the problem;
// nothing on stdout; and the fixture folder left as it was (no output
// folder, no temporaries). The expected codes and messages are known by
// construction: each fixture is made with the one fault its case names.
func TestTimelineBadInputs(t *testing.T) {
	dir := t.TempDir()
	p := func(name string) string { return filepath.Join(dir, name) }
	synth := func(out string, extra ...string) {
		mustRun(t, append([]string{"demo", "synth", "--width", "40", "--height", "30", "--out", out, "--quiet"}, extra...)...)
	}
	// Three dated scenes of 6 bands, and one fault each for the rest.
	a, b, c := p("site-2019.tif"), p("site-2020.tif"), p("site-2021.tif")
	synth(a, "--bands", "6", "--seed", "1")
	synth(b, "--bands", "6", "--seed", "2")
	synth(c, "--bands", "6", "--seed", "3")
	five := p("five-2022.tif")
	synth(five, "--bands", "5", "--seed", "4")
	other := p("other-2022.tif")
	synth(other, "--bands", "6", "--seed", "5", "--width", "30", "--height", "20")
	undated := p("undated.tif")
	synth(undated, "--bands", "6", "--seed", "6")
	dup := p("dup_2020.tif") // the same year as b
	synth(dup, "--bands", "6", "--seed", "8")
	// Scenes whose bands are named: the third's are in another order.
	img := readAll(t, a)
	names := []string{"blue", "green", "red", "nir", "swir1", "swir2"}
	swapped := []string{"green", "blue", "red", "nir", "swir1", "swir2"}
	named := func(name string, desc []string) string {
		path := p(name)
		o, err := raster.Create(path, raster.Spec{Grid: img.Grid, Bands: img.bands, DataType: "Int16", Descriptions: desc})
		if err != nil {
			t.Fatal(err)
		}
		defer o.Abort()
		if err := o.Write(tiles.Tile{W: img.Width, H: img.Height}, img.values); err != nil {
			t.Fatal(err)
		}
		if err := o.Commit(); err != nil {
			t.Fatal(err)
		}
		return path
	}
	n1, n2, n3 := named("named-2019.tif", names), named("named-2020.tif", names), named("named-2021.tif", swapped)
	for i := range img.values {
		img.values[i] = 7
	}
	flat := named("flat.tif", names)
	zeroMask := p("zero-mask.tif")
	o, err := raster.Create(zeroMask, raster.Spec{Grid: img.Grid, Bands: 1, DataType: "Byte"})
	if err != nil {
		t.Fatal(err)
	}
	if err := o.Write(tiles.Tile{W: img.Width, H: img.Height}, make([]float64, img.Width*img.Height)); err != nil {
		t.Fatal(err)
	}
	if err := o.Commit(); err != nil {
		t.Fatal(err)
	}
	// Side inputs a run reads: a wavelengths file, a batch's list named as
	// its own output would be.
	waves := p("waves.txt")
	writeFile(t, waves, "wavelength_nm\n450\n550\n650\n850\n950\n1650\n")
	basisA := p("a.basis.json")
	mustRun(t, "learn", a, "--out", basisA, "--quiet")
	list := p("site-2019.lst")
	writeFile(t, list, a+"\n")
	out := p("out/timeline")
	tl := func(extra ...string) []string { return append([]string{"timeline", "--out", out}, extra...) }

	tests := []badCase{

		{"timeline one scene", tl(a), 2, []string{"at least 2 scenes, got 1"}},
		{"timeline without out", []string{"timeline", a, b, c}, 2, []string{"out", "not set"}},
		{"timeline dates too few", tl(a, b, c, "--dates", "2019,2020"), 2, []string{"--dates lists 2 dates for 3 scenes"}},
		{"timeline dates too many", tl(a, b, c, "--dates", "2019,2020,2021,2022"), 2, []string{"--dates lists 4 dates for 3 scenes"}},
		{"timeline dates not a date", tl(a, b, c, "--dates", "2019,2020,soon"), 2, []string{`"soon"`, c}},
		{"timeline dates duplicate", tl(a, b, c, "--dates", "2019,2020,2020"), 2, []string{b, c, "same date 2020"}},
		{"timeline duplicate date", tl(a, b, dup), 2, []string{b, dup, "same date 2020"}},
		{"timeline missing date", tl(a, b, undated), 1, []string{undated, "has no date", "--dates"}},
		{"timeline band counts differ", tl(a, b, five), 1, []string{five, "5 bands", a, "6"}},
		{"timeline band names differ", tl(n1, n2, n3), 1, []string{n3, n1, `"green"`, `"blue"`, "same bands in the same order"}},
		{"timeline grids differ", tl(a, b, other), 1, []string{other, "--align"}},
		{"timeline confirm", tl(a, b, c, "--confirm", "maybe"), 2, []string{`--confirm "maybe"`}},
		{"timeline normalize", tl(a, b, c, "--normalize", "histogram"), 2, []string{`--normalize "histogram"`}},
		{"timeline resampling without align", tl(a, b, c, "--resampling", "cubic"), 2, []string{"--resampling cubic applies only with --align"}},
		{"change resampling without align", []string{"change", a, b, "--out", out, "--resampling", "cubic"}, 2, []string{"--resampling cubic applies only with --align"}},
		{"learn resampling without align", []string{"learn", a, "--out", p("basis.json"), "--resampling", "average"}, 2, []string{"--resampling average applies only with --align"}},
		{"change reference of several bands", []string{"change", a, b, "--out", out, "--reference", c}, 1, []string{c, "has 6 bands"}},
		{"learn constant image", []string{"learn", flat, "--out", p("basis.json")}, 1, []string{flat, "every band", "constant"}},
		{"learn mask of zeros", []string{"learn", a, "--mask", zeroMask, "--out", p("basis.json")}, 1, []string{a, "mask " + zeroMask + " marks every pixel invalid"}},
		{"change mask of zeros", []string{"change", a, b, "--out", out, "--mask-after", zeroMask}, 1, []string{b, "mask " + zeroMask + " marks every pixel invalid"}},
		{"mask bit not a number", []string{"learn", a, "--mask", a + ":bits=x", "--out", p("basis.json")}, 2, []string{`--mask "` + a + `:bits=x": "x" is not a bit number`}},
		{"bands by a name no band has", []string{"learn", a, "--bands", "B99", "--out", p("basis.json")}, 2, []string{a, "no band named B99"}},
		{"learn over its wavelengths", []string{"learn", a, "--wavelengths", waves, "--out", waves, "--overwrite"}, 1, []string{"output " + waves + " is the same file as wavelengths"}},
		{"batch over its list", []string{"fold", "--list", list, "--basis", basisA, "--out-dir", dir, "--name", "{stem}.lst", "--overwrite"}, 1, []string{"output " + list + " is the same file as list"}},
		{"learn band names differ", []string{"learn", n1, n3, "--out", p("basis.json")}, 1, []string{n3, n1, "--ignore-band-names"}},
	}
	checkBadCases(t, dir, tests)
	// The flag the refusal advises is accepted and pools the scenes.
	basis := p("basis.json")
	mustRun(t, "learn", n1, n3, "--ignore-band-names", "--out", basis, "--quiet")
	if _, err := os.Stat(basis); err != nil {
		t.Errorf("learn --ignore-band-names wrote no basis: %v", err)
	}
}
