package main

import (
	"bandfold/cmd/bandfold/internal/jobtest"
	"bytes"
	"crypto/sha256"
	"encoding/json"
	"io/fs"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"testing"
)

// badCase is a command line that must fail before writing anything: with
// exit code code and one line on stderr, "bandfold: ...", containing every
// string of want (the file or flag concerned and the problem).
type badCase struct {
	name string
	argv []string
	code int
	want []string
}

// TestBadInputs runs every command on bad input built by newFixtures. For
// each case it checks the exit code (2 for a malformed flag or option value,
// a missing or extra argument, or a file the user named that is missing or
// unreadable, whatever flag or argument named it (issue 24, item 9); 1 for
// a file or its data that is wrong),
// that stderr is exactly one line starting "bandfold: " and holding every
// wanted string, that stdout is empty, and, run again with --json, that
// stdout is exactly one object {"error": the same message, "exit_code": the
// same code}; after both runs every file in the fixture folder must have
// the SHA-256 it had before, and no file or folder (hidden temporaries
// included) may have appeared.
//
// Every expected exit code, message part and untouched file is known by
// construction: the fixtures are what newFixtures made, the codes follow
// the rule above, and the messages must name the file or flag given and
// the problem built into it. Refusing an output because of what is on disk
// (the same file as an input, mask, basis or another output, with or
// without --overwrite; an existing file; a folder; a plain file in its
// path) exits 1. An output value that can never be right whatever is on
// disk (a GDAL virtual path, as --preview already is; a --name leaving
// --out-dir or without {stem}) exits 2, as do creation options GDAL
// refuses.
func TestBadInputs(t *testing.T) {
	f := newFixtures(t)
	// --shard auto must find no scheduler, whatever runs the tests.
	t.Setenv("SLURM_ARRAY_TASK_ID", "")
	t.Setenv("JOB_COMPLETION_INDEX", "")

	a, b, five, other := f.sceneA, f.sceneB, f.five, f.otherGrid
	basis, comps, part := f.basis, f.components, f.partial
	newBasis := f.path("out/new.basis.json") // under a missing folder
	newTif := f.path("out/new.tif")
	newDir := f.path("out/batch")
	newChange := f.path("out/change")
	learn := func(extra ...string) []string {
		return append([]string{"learn", a, "--out", newBasis}, extra...)
	}
	fold := func(extra ...string) []string {
		return append([]string{"fold", a, "--basis", basis, "--out", newTif}, extra...)
	}
	batch := func(extra ...string) []string {
		return append([]string{"fold", "--list", f.list, "--basis", basis, "--out-dir", newDir}, extra...)
	}
	unfold := func(extra ...string) []string {
		return append([]string{"unfold", comps, "--basis", basis, "--out", newTif}, extra...)
	}
	change := func(extra ...string) []string {
		return append([]string{"change", a, b, "--out", newChange}, extra...)
	}
	synth := func(extra ...string) []string {
		return append([]string{"demo", "synth", "--bands", "6", "--width", "40", "--height", "30", "--out", newTif}, extra...)
	}
	demoDir := f.path("out/demo")

	tests := []badCase{
		// Flag syntax and argument counts: cobra and pflag refuse these
		// before any command runs.
		{"learn unknown flag", learn("--frobnicate"), 2, []string{"unknown flag", "--frobnicate"}},
		{"fold unknown shorthand", fold("-z"), 2, []string{"unknown shorthand flag", "'z'"}},
		{"learn flag without value", []string{"learn", a, "--out"}, 2, []string{"flag needs an argument", "--out"}},
		{"fold flag without value", []string{"fold", a, "--out", newTif, "--basis"}, 2, []string{"flag needs an argument", "--basis"}},
		{"learn stride not a number", learn("--stride", "x"), 2, []string{"--stride", `"x"`}},
		{"learn variance not a number", learn("--variance", "abc"), 2, []string{"--variance", `"abc"`}},
		{"fold components not a number", fold("--components", "two"), 2, []string{"--components", `"two"`}},
		{"change sample not a number", change("--sample", "1e3x"), 2, []string{"--sample", `"1e3x"`}},
		{"workers zero", append([]string{"--workers", "0"}, learn()...), 2, []string{"--workers 0", "at least 1"}},
		{"quiet and verbose", append([]string{"--quiet", "--verbose"}, learn()...), 2, []string{"quiet", "verbose"}},
		{"learn no image", []string{"learn", "--out", newBasis}, 2, []string{"requires at least 1 arg"}},
		{"learn no output", []string{"learn", a}, 2, []string{"out", "partial", "required"}},
		{"learn out and partial", learn("--partial", f.path("out/p.json")), 2, []string{"out", "partial", "none of the others"}},
		{"inspect two bases", []string{"inspect", basis, f.basisB}, 2, []string{"accepts 1 arg(s), received 2"}},
		{"inspect no basis", []string{"inspect"}, 2, []string{"accepts 1 arg(s), received 0"}},
		{"unfold two inputs", []string{"unfold", comps, comps, "--basis", basis, "--out", newTif}, 2, []string{"accepts 1 arg(s), received 2"}},
		{"change one date", []string{"change", a, "--out", newChange}, 2, []string{"accepts 2 arg(s), received 1"}},
		{"change three dates", []string{"change", a, b, a, "--out", newChange}, 2, []string{"accepts 2 arg(s), received 3"}},
		{"fold without basis", []string{"fold", a, "--out", newTif}, 2, []string{"basis", "not set"}},
		{"fold out and out-dir", fold("--out-dir", newDir), 2, []string{"out", "out-dir", "none of the others"}},
		{"merge without out", []string{"merge", part}, 2, []string{"out", "not set"}},
		{"demo extra argument", []string{"demo", "extra", "--dir", demoDir}, 2, []string{`"extra"`}},
		{"synth extra argument", append(synth(), "extra"), 2, []string{`"extra"`}},
		{"synth without out", []string{"demo", "synth", "--bands", "6", "--width", "40", "--height", "30"}, 2, []string{"out", "not set"}},

		// Band selection.
		{"bands zero", learn("--bands", "0"), 2, []string{`--bands "0"`, "count from 1"}},
		{"bands negative", learn("--bands", "-1"), 2, []string{`--bands "-1"`, "count from 1"}},
		{"bands beyond the file", learn("--bands", "9"), 2, []string{a, "band 9", "6 bands"}},
		{"bands backwards", learn("--bands", "3-1"), 2, []string{`--bands "3-1"`, "runs backwards"}},
		{"bands empty item", learn("--bands", "1,,2"), 2, []string{`--bands "1,,2"`, "empty item"}},
		{"bands duplicated", learn("--bands", "1,2,2"), 2, []string{`--bands "1,2,2"`, "band 2 selected twice"}},
		{"bands not a number", learn("--bands", "red"), 2, []string{"no band named red", "the bands: "}},
		{"bands select one", learn("--bands", "2"), 2, []string{a, "selects only 1", "at least 2"}},
		{"fold bands beyond the file", fold("--bands", "1-9"), 2, []string{a, "band 7", "6 bands"}},
		{"fold bands fewer than the basis", fold("--bands", "1-5"), 2, []string{a, basis, "--bands", "5", "has 6"}},
		{"change bands zero", change("--bands", "0"), 2, []string{`--bands "0"`, "count from 1"}},
		{"change bands select one", change("--bands", "4"), 2, []string{a, "selects only 1"}},
		{"unfold compare bands beyond the file", unfold("--compare", a, "--bands", "9"), 2, []string{a, "band 9", "6 bands"}},

		// Nodata.
		{"nodata not a number", learn("--nodata", "x"), 2, []string{`--nodata "x"`, "not a number"}},
		{"nodata infinite", learn("--nodata", "inf"), 2, []string{`--nodata "inf"`, "not a number"}},
		{"nodata list of 3 on 6 bands", learn("--nodata", "1,2,3"), 2, []string{a, "nodata", "3 values", "6 bands"}},
		{"fold nodata list of 2 on 6 bands", fold("--nodata", "0,0"), 2, []string{a, "nodata", "2 values", "6 bands"}},
		{"change nodata list on a NaN scene", []string{"change", f.nanScene, a, "--out", newChange, "--nodata", "nan,nan"}, 2, []string{f.nanScene, "nodata", "2 values", "6 bands"}},
		{"unfold nodata not a number", unfold("--compare", a, "--nodata", "none"), 2, []string{`--nodata "none"`, "not a number"}},

		// Masks.
		{"learn missing mask", learn("--mask", f.missing), 2, []string{f.missing, "no such file"}},
		{"learn mask on another grid", learn("--mask", f.maskOther), 1, []string{f.maskOther, "not on the grid", a}},
		{"learn mask not a raster", learn("--mask", f.text), 1, []string{f.text, "not a raster"}},
		{"fold missing mask", fold("--mask", f.missing), 2, []string{f.missing, "no such file"}},
		{"change mask-before missing", change("--mask-before", f.missing), 2, []string{f.missing, "no such file"}},
		{"change mask-after on another grid", change("--mask-after", f.maskOther), 1, []string{f.maskOther, "not on the grid"}},

		// Input files.
		{"learn missing input", []string{"learn", f.missing, "--out", newBasis}, 2, []string{f.missing, "no such file"}},
		{"learn input not a raster", []string{"learn", f.text, "--out", newBasis}, 1, []string{f.text, "not a raster"}},
		{"learn empty input", []string{"learn", f.empty, "--out", newBasis}, 1, []string{f.empty, "empty"}},
		{"learn folder as input", []string{"learn", f.misc, "--out", newBasis}, 1, []string{f.misc, "folder"}},
		{"learn stack with a missing file", []string{"learn", a + "," + f.missing, "--out", newBasis}, 2, []string{f.missing, "no such file"}},
		{"learn pooled band counts", []string{"learn", a, five, "--out", newBasis}, 1, []string{five, "5 bands", "same bands"}},
		{"learn all-NaN band", []string{"learn", f.allNaN, "--out", newBasis}, 1, []string{f.allNaN, "no valid pixels"}},
		{"fold missing basis", []string{"fold", a, "--basis", f.path("none.basis.json"), "--out", newTif}, 2, []string{f.path("none.basis.json"), "no such file"}},
		{"fold corrupted basis", []string{"fold", a, "--basis", f.corrupt, "--out", newTif}, 1, []string{f.corrupt, "malformed", "eigenvalues"}},
		{"fold basis of 5 bands", []string{"fold", a, "--basis", f.fiveBasis, "--out", newTif}, 1, []string{a, f.fiveBasis, "6 bands", "has 5"}},
		{"fold partial as basis", []string{"fold", a, "--basis", part, "--out", newTif}, 1, []string{part, "bandfold-partial"}},
		{"fold text as basis", []string{"fold", a, "--basis", f.text, "--out", newTif}, 1, []string{f.text, "malformed"}},
		{"fold missing input", []string{"fold", f.missing, "--basis", basis, "--out", newTif}, 2, []string{f.missing, "no such file"}},
		{"fold empty input", []string{"fold", f.empty, "--basis", basis, "--out", newTif}, 1, []string{f.empty, "empty"}},
		{"fold missing list", []string{"fold", "--list", f.path("none.txt"), "--basis", basis, "--out-dir", newDir}, 2, []string{f.path("none.txt"), "no such file"}},
		{"fold glob matching nothing", []string{"fold", f.path("*.nothing"), "--basis", basis, "--out-dir", newDir}, 1, []string{f.path("*.nothing"), "no file matches"}},
		{"inspect corrupted basis", []string{"inspect", f.corrupt}, 1, []string{f.corrupt, "malformed", "eigenvalues"}},
		{"inspect text", []string{"inspect", f.text}, 1, []string{f.text, "malformed"}},
		{"inspect empty file", []string{"inspect", f.empty}, 1, []string{f.empty, "empty"}},
		{"inspect folder", []string{"inspect", f.misc}, 1, []string{f.misc, "is a directory"}},
		{"inspect partial", []string{"inspect", part}, 1, []string{part, "bandfold-partial"}},
		{"unfold missing components", []string{"unfold", f.missing, "--basis", basis, "--out", newTif}, 2, []string{f.missing, "no such file"}},
		{"unfold text as components", []string{"unfold", f.text, "--basis", basis, "--out", newTif}, 1, []string{f.text, "not a raster"}},
		{"unfold corrupted basis", []string{"unfold", comps, "--basis", f.corrupt, "--out", newTif}, 1, []string{f.corrupt, "malformed"}},
		{"change missing after", []string{"change", a, f.missing, "--out", newChange}, 2, []string{f.missing, "no such file"}},
		{"change empty before", []string{"change", f.empty, b, "--out", newChange}, 1, []string{f.empty, "empty"}},
		{"change all-NaN band", []string{"change", a, f.allNaN, "--out", newChange}, 1, []string{f.allNaN, "band 3", "nodata or NaN everywhere"}},

		// Outputs: refused before any work, nothing left behind.
		{"learn out is the input", []string{"learn", a, "--out", a}, 1, []string{a, "same file"}},
		{"learn out is the mask", []string{"learn", a, "--mask", f.mask, "--out", f.mask}, 1, []string{f.mask, "same file"}},
		{"learn out is the input with overwrite", []string{"learn", a, "--out", a, "--overwrite"}, 1, []string{a, "same file"}},
		{"learn out is the mask with overwrite", []string{"learn", a, "--mask", f.mask, "--out", f.mask, "--overwrite"}, 1, []string{f.mask, "same file"}},
		{"fold out is the input with overwrite", []string{"fold", a, "--basis", basis, "--out", a, "--overwrite"}, 1, []string{a, "same file"}},
		{"fold out is the basis with overwrite", []string{"fold", a, "--basis", basis, "--out", basis, "--overwrite"}, 1, []string{basis, "same file"}},
		{"unfold out is the components with overwrite", []string{"unfold", comps, "--basis", basis, "--out", comps, "--overwrite"}, 1, []string{comps, "same file"}},
		{"unfold out is the compared image with overwrite", []string{"unfold", comps, "--basis", basis, "--compare", a, "--out", a, "--overwrite"}, 1, []string{a, "same file"}},
		{"merge out is the partial with overwrite", []string{"merge", part, "--out", part, "--overwrite"}, 1, []string{part, "same file"}},
		{"fold out is the input", []string{"fold", a, "--basis", basis, "--out", a}, 1, []string{a, "same file"}},
		{"fold out is the basis", []string{"fold", a, "--basis", basis, "--out", basis}, 1, []string{basis, "same file"}},
		{"fold out is the mask", []string{"fold", a, "--basis", basis, "--mask", f.mask, "--out", f.mask}, 1, []string{f.mask, "same file"}},
		{"fold preview is the out", fold("--preview", newTif), 1, []string{newTif, "same file"}},
		{"fold preview is the input", fold("--preview", a), 1, []string{a, "same file"}},
		{"fold out is a folder", []string{"fold", a, "--basis", basis, "--out", f.misc}, 1, []string{f.misc, "is a folder"}},
		{"fold out under a plain file", []string{"fold", a, "--basis", basis, "--out", filepath.Join(f.text, "x.tif")}, 1, []string{f.text, "not a folder"}},
		{"fold out exists", []string{"fold", a, "--basis", basis, "--out", comps}, 1, []string{comps, "exists", "--overwrite"}},
		{"fold out virtual", []string{"fold", a, "--basis", basis, "--out", "/vsimem/x.tif"}, 2, []string{"/vsimem/x.tif", "virtual"}},
		{"fold preview virtual", fold("--preview", "/vsimem/x.png"), 2, []string{"/vsimem/x.png", "local path"}},
		{"learn out under a plain file", []string{"learn", a, "--out", filepath.Join(f.text, "b.json")}, 1, []string{f.text, "not a folder"}},
		{"learn out exists", []string{"learn", b, "--out", basis}, 1, []string{basis, "exists", "--overwrite"}},
		{"learn out virtual", []string{"learn", a, "--out", "/vsis3/bucket/b.json"}, 2, []string{"/vsis3/bucket/b.json", "virtual"}},
		{"learn out is a folder", []string{"learn", a, "--out", f.misc}, 1, []string{f.misc, "is a folder"}},
		{"merge out is the partial", []string{"merge", part, "--out", part}, 1, []string{part, "same file"}},
		{"unfold out is the components", []string{"unfold", comps, "--basis", basis, "--out", comps}, 1, []string{comps, "same file"}},
		{"unfold out is the basis", []string{"unfold", comps, "--basis", basis, "--out", basis}, 1, []string{basis, "same file"}},
		{"unfold out is the compared image", []string{"unfold", comps, "--basis", basis, "--compare", a, "--out", a}, 1, []string{a, "same file"}},
		{"unfold out exists", []string{"unfold", comps, "--basis", basis, "--out", a}, 1, []string{a, "exists", "--overwrite"}},
		{"batch out-dir is a file", []string{"fold", a, "--basis", basis, "--out-dir", f.text}, 1, []string{f.text, "is a file"}},
		{"batch output is the input", []string{"fold", a, "--basis", basis, "--out-dir", f.dir, "--name", "{stem}.tif"}, 1, []string{a, "same file"}},
		{"batch name leaves out-dir", batch("--name", "../x_{stem}.tif"), 2, []string{"--name", "../x_{stem}.tif", "would leave"}},
		{"batch name without stem", batch("--name", "x.tif"), 2, []string{"--name", "x.tif", "{stem}"}},
		{"batch with preview", batch("--preview", f.path("out/p.png")), 2, []string{"--preview", "--out"}},
		{"fold out with list", []string{"fold", "--list", f.list, "--basis", basis, "--out", newTif}, 2, []string{"--list", "--out-dir"}},
		{"fold out with two inputs", []string{"fold", a, b, "--basis", basis, "--out", newTif}, 2, []string{"--out takes one input", "2 inputs"}},
		{"inspect plots under a plain file", []string{"inspect", basis, "--plots", filepath.Join(f.text, "plots")}, 1, []string{f.text, "not a folder"}},
		{"change out is the inputs' folder", []string{"change", a, b, "--out", f.dir}, 1, []string{f.dir, a}},
		{"change out is the inputs' folder with overwrite", []string{"change", a, b, "--out", f.dir, "--overwrite"}, 1, []string{f.dir, a}},
		{"change out holds unrelated files", []string{"change", a, b, "--out", f.misc}, 1, []string{f.misc, "not a previous bandfold output"}},
		{"change out holds unrelated files with overwrite", []string{"change", a, b, "--out", f.misc, "--overwrite"}, 1, []string{f.misc, "not a previous bandfold output"}},
		{"change out exists", []string{"change", a, b, "--out", f.changeOut}, 1, []string{f.changeOut, "exists", "--overwrite"}},
		{"change out is a file", []string{"change", a, b, "--out", f.text}, 1, []string{f.text, "not a folder"}},
		{"change out virtual", []string{"change", a, b, "--out", "/vsimem/chg"}, 2, []string{"/vsimem/chg", "virtual"}},
		{"synth out exists", []string{"demo", "synth", "--bands", "6", "--width", "40", "--height", "30", "--out", a}, 1, []string{a, "exists", "--overwrite"}},
		{"synth out virtual", []string{"demo", "synth", "--bands", "6", "--width", "40", "--height", "30", "--out", "/vsimem/s.tif"}, 2, []string{"/vsimem/s.tif", "virtual"}},
		{"demo dir is a file", []string{"demo", "--dir", f.text, "--size", "64"}, 1, []string{f.text, "not a directory"}},

		// Creation options and output types.
		{"fold co without value", fold("--co", "FOO"), 2, []string{"--co", `"FOO"`, "KEY=VALUE"}},
		{"fold co bad value", fold("--co", "COMPRESS=NOPE"), 2, []string{"creation option COMPRESS=NOPE", "unexpected value"}},
		{"fold co unknown key", fold("--co", "FROBNICATE=YES"), 2, []string{"creation option FROBNICATE=YES", "does not support"}},
		{"fold cog co bad value", fold("--format", "cog", "--co", "COMPRESS=NOPE"), 2, []string{"creation option COMPRESS=NOPE", "unexpected value"}},
		{"unfold co without value", unfold("--co", "FOO"), 2, []string{`"FOO"`, "KEY=VALUE"}},
		{"unfold co bad value", unfold("--co", "COMPRESS=NOPE"), 2, []string{"creation option COMPRESS=NOPE", "unexpected value"}},
		{"fold format png", fold("--format", "png"), 2, []string{`--format "png"`, "gtiff or cog"}},
		{"unfold format png", unfold("--format", "png"), 2, []string{`--format "png"`, "gtiff or cog"}},
		{"fold type int8", fold("--type", "int8"), 2, []string{`--type "int8"`, "float32, float64 or int16"}},
		{"batch type int8", batch("--type", "int8"), 2, []string{`--type "int8"`, "float32, float64 or int16"}},
		{"fold components beyond the basis", fold("--components", "7"), 2, []string{"--components 7", basis, "6"}},
		{"fold components negative", fold("--components", "-1"), 2, []string{"--components -1"}},
		{"fold tile negative", fold("--tile", "-8"), 2, []string{"--tile -8"}},

		// learn and merge.
		{"variance zero", learn("--variance", "0"), 2, []string{"--variance 0", "(0, 1]"}},
		{"variance above one", learn("--variance", "1.5"), 2, []string{"--variance 1.5", "(0, 1]"}},
		{"components beyond the bands", learn("--components", "7"), 2, []string{"--components 7", "6 bands"}},
		{"components negative", learn("--components", "-2"), 2, []string{"--components -2"}},
		{"stride zero", learn("--stride", "0"), 2, []string{"--stride 0", "at least 1"}},
		{"stride negative", learn("--stride", "-2"), 2, []string{"--stride -2", "at least 1"}},
		{"mode unknown", learn("--mode", "x"), 2, []string{`--mode "x"`, "covariance or correlation"}},
		{"shard out of range", []string{"learn", a, "--partial", f.path("out/p.json"), "--shard", "4/4"}, 2, []string{`--shard "4/4"`, "0 <= I < N"}},
		{"shard malformed", []string{"learn", a, "--partial", f.path("out/p.json"), "--shard", "one/two"}, 2, []string{`--shard "one/two"`, "I/N"}},
		{"shard auto without scheduler", []string{"learn", a, "--partial", f.path("out/p.json"), "--shard", "auto"}, 2, []string{"--shard auto", "no job array"}},
		{"shard without partial", learn("--shard", "1/2"), 2, []string{"--shard", "--partial"}},
		{"merge missing shard", []string{"merge", part, "--out", newBasis}, 1, []string{part, "shard 1 of 2 missing"}},
		{"merge duplicated shard", []string{"merge", part, part, "--out", newBasis}, 1, []string{part, "duplicated"}},
		{"merge a basis file", []string{"merge", basis, "--out", newBasis}, 1, []string{basis, "bandfold-basis", "bandfold-partial"}},
		{"merge missing partial", []string{"merge", f.path("none.json"), "--out", newBasis}, 2, []string{f.path("none.json"), "no such file"}},
		{"merge variance zero", []string{"merge", part, "--out", newBasis, "--variance", "0"}, 2, []string{"--variance 0", "(0, 1]"}},
		{"merge components negative", []string{"merge", part, "--out", newBasis, "--components", "-1"}, 2, []string{"--components -1"}},

		// unfold.
		{"unfold type unknown", unfold("--type", "x"), 2, []string{`--type "x"`, "same, float32 or float64"}},
		{"unfold with another basis", []string{"unfold", comps, "--basis", f.basisB, "--out", newTif}, 1, []string{comps, f.basisB, "--ignore-basis-mismatch"}},
		{"unfold with a basis of 5 bands", []string{"unfold", comps, "--basis", f.fiveBasis, "--out", newTif}, 1, []string{comps, f.fiveBasis}},
		{"unfold compare on another grid", unfold("--compare", other), 1, []string{other, "not on the grid", comps}},
		{"unfold compare with 5 bands", unfold("--compare", five), 1, []string{five, "5 bands", "has 6"}},
		{"unfold compare missing", unfold("--compare", f.missing), 2, []string{f.missing, "no such file"}},

		// change.
		{"change bands-after zero", change("--bands-after", "0"), 2, []string{`--bands-after "0"`, "count from 1"}},
		{"change per-date band counts differ", change("--bands-before", "1-6", "--bands-after", "1-5"), 2, []string{"--bands-before", "--bands-after", a, b}},
		{"change band counts differ", []string{"change", a, five, "--out", newChange}, 1, []string{five, "has 5", "same bands"}},
		{"change other grid without align", []string{"change", a, other, "--out", newChange}, 1, []string{other, "not on the grid", "--align"}},
		{"change threshold unknown", change("--threshold", "magic"), 2, []string{`--threshold "magic"`}},
		{"change threshold chisq above one", change("--threshold", "chisq:1.5"), 2, []string{`--threshold "chisq:1.5"`}},
		{"change threshold sigma negative", change("--threshold", "sigma:-1"), 2, []string{`--threshold "sigma:-1"`}},
		{"change min-area in acres", change("--min-area", "5 acres"), 2, []string{`--min-area "5 acres"`, "m2, ha, km2 or px"}},
		{"change min-area negative", change("--min-area", "-4px"), 2, []string{`--min-area "-4px"`}},
		{"change min-area in ha without CRS", []string{"change", f.noCRSA, f.noCRSB, "--out", newChange, "--min-area", "1ha"}, 2, []string{f.noCRSA, "--min-area", "CRS"}},
		{"change preview-bands beyond the bands", change("--preview-bands", "1,2,9"), 2, []string{"--preview-bands", "9", "6 bands"}},
		{"change preview-bands two", change("--preview-bands", "1,2"), 2, []string{`--preview-bands "1,2"`, "three"}},
		{"change sample too small", change("--sample", "10"), 2, []string{"--sample 10", "at least 100"}},
		{"change resampling unknown", change("--align", "--resampling", "x"), 2, []string{`--resampling "x"`}},
		{"change components beyond the bands", change("--components", "9"), 2, []string{"--components 9", "6"}},
		{"change reference on another grid", change("--reference", f.maskOther), 1, []string{f.maskOther, "grid"}},
		{"change reference missing", change("--reference", f.missing), 2, []string{f.missing, "no such file"}},
		{"change basis of 5 bands", change("--basis", f.fiveBasis), 1, []string{f.fiveBasis, "5"}},
		{"change corrupted basis", change("--basis", f.corrupt), 1, []string{f.corrupt, "malformed"}},

		// demo and demo synth.
		{"demo size zero", []string{"demo", "--dir", demoDir, "--size", "0"}, 2, []string{"--size 0"}},
		{"demo size negative", []string{"demo", "--dir", demoDir, "--size", "-5"}, 2, []string{"--size -5"}},
		{"demo size not a number", []string{"demo", "--dir", demoDir, "--size", "big"}, 2, []string{"--size", `"big"`}},
		{"synth bands zero", []string{"demo", "synth", "--bands", "0", "--width", "40", "--height", "30", "--out", newTif}, 2, []string{"--bands 0"}},
		{"synth width zero", []string{"demo", "synth", "--bands", "6", "--width", "0", "--height", "30", "--out", newTif}, 2, []string{"--width 0"}},
		{"synth block 17", synth("--block", "17"), 2, []string{"--block 17", "multiple of 16"}},
		{"synth interleave unknown", synth("--interleave", "x"), 2, []string{`--interleave "x"`, "pixel or band"}},
		{"synth type unknown", synth("--type", "x"), 2, []string{`--type "x"`, "int16, uint16 or float32"}},
	}
	checkBadCases(t, f.dir, tests)
}

// checkBadCases runs each case, checks its failure with checkFailure and
// the same run with --json: exactly one object on stdout holding stderr's
// message and the exit code. After each run, every file and folder under
// dir must be as it was (restoreTree).
func checkBadCases(t *testing.T, dir string, tests []badCase) {
	t.Helper()
	before := snapshotTree(t, dir)
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			code, stdout, stderr := bandfold(t, tc.argv...)
			checkFailure(t, tc, code, stdout, stderr)
			restoreTree(t, dir, before)
			// The same run with --json: one object on stdout, holding the
			// message of stderr's "bandfold: " line.
			jcode, jout, jerr := bandfold(t, append([]string{"--json"}, tc.argv...)...)
			if jcode != tc.code {
				t.Errorf("with --json: exit %d, want %d", jcode, tc.code)
			}
			msg := message(stderr)
			var obj map[string]any
			dec := json.NewDecoder(strings.NewReader(jout))
			if strings.Count(jout, "\n") != 1 || !strings.HasSuffix(jout, "\n") || dec.Decode(&obj) != nil || dec.More() {
				t.Errorf("with --json: stdout %q, want one JSON object on one line", jout)
			} else if len(obj) != 4 || obj["format"] != "bandfold-error" || obj["version"] != 1.0 || obj["error"] != msg || obj["exit_code"] != float64(tc.code) {
				t.Errorf("with --json: stdout %s, want {\"format\": \"bandfold-error\", \"version\": 1, \"error\": %q, \"exit_code\": %d}", strings.TrimSpace(jout), msg, tc.code)
			}
			jobtest.ValidJSONIn(t, "../../docs/schemas", "error", []byte(jout))
			if jerr != stderr {
				t.Errorf("with --json: stderr %q, want %q as without it", jerr, stderr)
			}
			restoreTree(t, dir, before)
		})
	}
}

// message returns the text after "bandfold: " of the first stderr line
// that starts so.
func message(stderr string) string {
	for _, line := range strings.Split(stderr, "\n") {
		if msg, ok := strings.CutPrefix(line, "bandfold: "); ok {
			return msg
		}
	}
	return ""
}

// checkFailure checks a failed run's exit code and streams against tc.
func checkFailure(t *testing.T, tc badCase, code int, stdout, stderr string) {
	t.Helper()
	if code != tc.code {
		t.Errorf("exit %d, want %d (stderr %q)", code, tc.code, stderr)
	}
	first, rest, _ := strings.Cut(stderr, "\n")
	if !strings.HasPrefix(first, "bandfold: ") || rest != "" || !strings.HasSuffix(stderr, "\n") {
		t.Errorf("stderr %q, want exactly one line starting \"bandfold: \"", stderr)
	}
	line := "bandfold: " + message(stderr)
	var missing []string
	for _, w := range tc.want {
		if !strings.Contains(line, w) {
			missing = append(missing, w)
		}
	}
	if len(missing) > 0 {
		t.Errorf("message %q lacks %q", line, missing)
	}
	if stdout != "" {
		t.Errorf("stdout %q, want nothing without --json", stdout)
	}
}

// fileState is what a snapshot keeps of a path: its kind, and for files
// the contents and their SHA-256.
type fileState struct {
	dir  bool
	sum  [sha256.Size]byte
	data []byte
}

// snapshotTree records every file and folder under root (hidden ones
// included) by path relative to root.
func snapshotTree(t *testing.T, root string) map[string]fileState {
	t.Helper()
	out := map[string]fileState{}
	err := filepath.WalkDir(root, func(p string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		rel, _ := filepath.Rel(root, p)
		if d.IsDir() {
			out[rel] = fileState{dir: true}
			return nil
		}
		data, err := os.ReadFile(p)
		if err != nil {
			return err
		}
		out[rel] = fileState{sum: sha256.Sum256(data), data: data}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	return out
}

// restoreTree compares root with the snapshot want and reports every file
// or folder that appeared, changed or went missing; then it puts root back
// as it was, so that one case's damage does not spill into the next.
func restoreTree(t *testing.T, root string, want map[string]fileState) {
	t.Helper()
	got := snapshotTree(t, root)
	var added, changed, removed []string
	for rel, g := range got {
		w, ok := want[rel]
		switch {
		case !ok:
			added = append(added, rel)
		case g.dir != w.dir || g.sum != w.sum:
			changed = append(changed, rel)
		}
	}
	for rel := range want {
		if _, ok := got[rel]; !ok {
			removed = append(removed, rel)
		}
	}
	if len(added)+len(changed)+len(removed) == 0 {
		return
	}
	sort.Strings(added)
	sort.Strings(changed)
	sort.Strings(removed)
	t.Errorf("the fixture folder changed: new %q, modified %q, removed %q", added, changed, removed)
	// Deepest first, so that folders are empty when their turn comes.
	sort.Sort(sort.Reverse(sort.StringSlice(added)))
	for _, rel := range added {
		if err := os.RemoveAll(filepath.Join(root, rel)); err != nil {
			t.Fatal(err)
		}
	}
	for _, rel := range append(changed, removed...) {
		w, p := want[rel], filepath.Join(root, rel)
		if w.dir {
			os.RemoveAll(p)
			if err := os.MkdirAll(p, 0o755); err != nil {
				t.Fatal(err)
			}
			continue
		}
		os.RemoveAll(p)
		if err := os.MkdirAll(filepath.Dir(p), 0o755); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(p, w.data, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	if after := snapshotTree(t, root); !sameTree(after, want) {
		t.Fatal("could not restore the fixture folder")
	}
}

// sameTree reports whether two snapshots record the same paths and sums.
func sameTree(a, b map[string]fileState) bool {
	if len(a) != len(b) {
		return false
	}
	for rel, x := range a {
		y, ok := b[rel]
		if !ok || x.dir != y.dir || !bytes.Equal(x.sum[:], y.sum[:]) {
			return false
		}
	}
	return true
}
