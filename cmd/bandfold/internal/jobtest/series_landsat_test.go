package jobtest

import (
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"bandfold/cmd/bandfold/internal/fold"
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/learn"
	"bandfold/cmd/bandfold/internal/pairchange"
	"bandfold/cmd/bandfold/internal/series"
	"bandfold/cmd/bandfold/internal/timeline"
	"bandfold/raster"
	"bandfold/tiles"
)

// The real Landsat 7 ETM+ (2001-07-30) and Landsat 8 OLI (2013-07-07)
// Level-1 band files of r-cran-satellite, one 41 x 41 window of path 195
// row 25 with their MTLs (make testdata; testdata/README.md).
const (
	landsatDir = "../../../../testdata/external/landsat"
	l7Product  = "LE07_L1TP_195025_20010730_20170204_01_T1"
	l8Product  = "LC08_L1TP_195025_20130707_20170503_01_T1"
)

// productStack joins the band files of a product into an IMAGE argument,
// in the folder dir (copying them and the MTL there when dir is not the
// test data folder), failing under CI when make testdata has not run.
func productStack(t *testing.T, dir, product string, bands ...string) string {
	t.Helper()
	var paths []string
	for _, b := range append(bands, "MTL") {
		name := product + "_B" + b + ".TIF"
		if b == "MTL" {
			name = product + "_MTL.txt"
		}
		src := filepath.Join(landsatDir, name)
		if _, err := os.Stat(src); err != nil {
			if os.Getenv("CI") != "" {
				t.Fatalf("%s missing under CI: make testdata failed", src)
			}
			t.Skipf("%s missing: run make testdata", src)
		}
		dst := src
		if dir != landsatDir {
			dst = filepath.Join(dir, name)
			CopyFile(t, src, dst)
		}
		if b != "MTL" {
			paths = append(paths, dst)
		}
	}
	return strings.Join(paths, ",")
}

var (
	l7Reflective = []string{"1", "2", "3", "4", "5", "7"}
	l8Reflective = []string{"2", "3", "4", "5", "6", "7"}
)

// TestTimelineReturnToTheFirstStateConfirmsNothing: date 3 holds the very
// data of date 1 (the Landsat 7 bands again, dated 2015), so no change
// between date 1 and date 2 lasts: every flag of the first step is a
// return, and nothing may be confirmed (known by construction). Each date
// is normalised onto the reference date directly, so date 3's fit is the
// identity and the skip (1, 3) flags nothing. The Landsat 8 scene's seven
// reflective bands (with the coastal band) are matched to Landsat 7's six
// by wavelength, without a band option.
func TestTimelineReturnToTheFirstStateConfirmsNothing(t *testing.T) {
	dir := t.TempDir()
	l7 := productStack(t, landsatDir, l7Product, l7Reflective...)
	l8 := productStack(t, landsatDir, l8Product, "1", "2", "3", "4", "5", "6", "7")
	again := productStack(t, filepath.Join(mkdir(t, dir, "again")), l7Product, l7Reflective...)
	res, err := timeline.Timeline(t.Context(), TestEnv, timeline.TimelineOptions{Scenes: []string{l7, l8, again}, Dates: []string{"2001-07-30", "2013-07-07", "2015-07-01"}, SharedOptions: series.SharedOptions{Input: jobkit.Input{Calibrate: raster.CalibrateTOA}, Out: filepath.Join(dir, "tl")}})
	if err != nil {
		t.Fatal(err)
	}
	if res.ChangedPixels != 0 {
		t.Errorf("a return to the first state: %d pixels confirmed, want 0", res.ChangedPixels)
	}
	if !strings.Contains(res.BandMatch, "LANDSAT_7 ETM band 1 = LANDSAT_8 OLI_TIRS band 2") || strings.Contains(res.BandMatch, "OLI_TIRS band 1") {
		t.Errorf("band match %q: want blue with blue and no coastal band", res.BandMatch)
	}
	if n := res.Scenes[2].Normalization; !n.Applied || n.Bands[0].Gain != 1 || n.Bands[0].Offset != 0 {
		t.Errorf("date 3 (date 1's data) normalised by %+v, want the identity", n)
	}
}

// TestTimelineIdenticalStepFlagsNothing: date 3 is a byte copy of date 2,
// so its step flags nothing (known by construction) and the warning says
// the dates are identical.
func TestTimelineIdenticalStepFlagsNothing(t *testing.T) {
	dir := t.TempDir()
	l7 := productStack(t, landsatDir, l7Product, l7Reflective...)
	l8 := productStack(t, landsatDir, l8Product, l8Reflective...)
	copyOf := productStack(t, mkdir(t, dir, "copy"), l8Product, l8Reflective...)
	env, log := LoggingEnv()
	res, err := timeline.Timeline(t.Context(), env, timeline.TimelineOptions{Scenes: []string{l7, l8, copyOf}, Dates: []string{"2001-07-30", "2013-07-07", "2014-07-07"}, SharedOptions: series.SharedOptions{Input: jobkit.Input{Calibrate: raster.CalibrateTOA}, Out: filepath.Join(dir, "tl")}})
	if err != nil {
		t.Fatal(err)
	}
	if s := res.Steps[1]; s.FlaggedPixels != 0 || !s.Identical {
		t.Errorf("identical step: %d flagged, identical %v; want 0 and true", s.FlaggedPixels, s.Identical)
	}
	if !strings.Contains(log.String(), "identical") {
		t.Errorf("no warning that the dates are identical in %q", log.String())
	}
}

// TestChangeMatchesBandsByWavelength: Landsat 7's blue, green and red
// against Landsat 8's coastal, blue and green, chosen band for band, are
// refused naming both bands and their wavelengths (USGS band tables: blue
// 450-515 nm, coastal 435-451 nm); without a choice, the bands the dates
// share are selected, and the map equals the one with the bands chosen by
// hand (Landsat 8 bands 2-7 for Landsat 7's six).
func TestChangeMatchesBandsByWavelength(t *testing.T) {
	dir := t.TempDir()
	l7 := productStack(t, landsatDir, l7Product, l7Reflective...)
	l8all := productStack(t, landsatDir, l8Product, "1", "2", "3", "4", "5", "6", "7")
	toa := jobkit.Input{Calibrate: raster.CalibrateTOA}
	_, err := pairchange.Change(t.Context(), TestEnv, pairchange.ChangeOptions{Before: l7, After: l8all, BandsBefore: []int{1, 2, 3}, BandsAfter: []int{1, 2, 3}, SharedOptions: series.SharedOptions{Input: toa, Out: filepath.Join(dir, "refused")}})
	WantError(t, "blue against coastal", err, true, "LANDSAT_7 ETM band 1", "450-515 nm", "LANDSAT_8 OLI_TIRS band 1", "435-451 nm", "--ignore-band-names")
	MustNotExist(t, "blue against coastal", filepath.Join(dir, "refused"))

	auto := RunChange(t, TestEnv, pairchange.ChangeOptions{Before: l7, After: l8all, SharedOptions: series.SharedOptions{Input: toa, Out: filepath.Join(dir, "auto")}})
	byHand := RunChange(t, TestEnv, pairchange.ChangeOptions{Before: l7, After: l8all, BandsAfter: []int{2, 3, 4, 5, 6, 7}, SharedOptions: series.SharedOptions{Input: toa, Out: filepath.Join(dir, "hand")}})
	if auto.BandMatch == "" || byHand.BandMatch != "" {
		t.Errorf("band match: automatic %q, by hand %q", auto.BandMatch, byHand.BandMatch)
	}
	for _, name := range []string{"change.tif", "magnitude.tif"} {
		_, a, _ := ReadImage(t, filepath.Join(dir, "auto", name), tiles.Tile{})
		_, b, _ := ReadImage(t, filepath.Join(dir, "hand", name), tiles.Tile{})
		if !slices.Equal(a, b) {
			t.Errorf("%s differs between automatic and hand-chosen bands", name)
		}
	}
}

// TestChangeDatesFromTheMTL: the dates come from each product's MTL
// (DATE_ACQUIRED 2013-07-07 and 2001-07-30) into the summary and every
// output's metadata, named by the stack, and BEFORE later than AFTER is
// warned about.
func TestChangeDatesFromTheMTL(t *testing.T) {
	dir := t.TempDir()
	l7 := productStack(t, landsatDir, l7Product, l7Reflective...)
	l8 := productStack(t, landsatDir, l8Product, l8Reflective...)
	res := RunChange(t, TestEnv, pairchange.ChangeOptions{Before: l8, After: l7, SharedOptions: series.SharedOptions{Input: jobkit.Input{Calibrate: raster.CalibrateTOA}, Out: filepath.Join(dir, "c")}})
	if res.BeforeDate != "2013-07-07" || res.AfterDate != "2001-07-30" || !slices.Equal(res.DateSource, []string{"MTL:DATE_ACQUIRED", "MTL:DATE_ACQUIRED"}) {
		t.Errorf("dates %s and %s from %v", res.BeforeDate, res.AfterDate, res.DateSource)
	}
	if !slices.ContainsFunc(res.Warnings, func(w string) bool { return strings.Contains(w, "is later than") }) {
		t.Errorf("no warning for swapped dates in %q", res.Warnings)
	}
	for _, name := range []string{"change.tif", "magnitude.tif"} {
		md, err := raster.ReadMetadata(filepath.Join(dir, "c", name))
		if err != nil {
			t.Fatal(err)
		}
		if b := md["BANDFOLD_BEFORE"]; !strings.HasPrefix(b, "2013-07-07 (") || strings.Contains(b, "_B7.TIF") {
			t.Errorf("%s: BANDFOLD_BEFORE %q, want the date and the stack's label", name, b)
		}
	}
}

// TestChangeEqualsTimelineOfTwoDates: the engine gives change and a
// two-date timeline (every flag kept) the same Z and the same flags on the
// real Landsat pair.
func TestChangeEqualsTimelineOfTwoDates(t *testing.T) {
	dir := t.TempDir()
	l7 := productStack(t, landsatDir, l7Product, l7Reflective...)
	l8 := productStack(t, landsatDir, l8Product, l8Reflective...)
	toa := jobkit.Input{Calibrate: raster.CalibrateTOA}
	RunChange(t, TestEnv, pairchange.ChangeOptions{Before: l7, After: l8, SharedOptions: series.SharedOptions{Input: toa, Out: filepath.Join(dir, "c")}})
	if _, err := timeline.Timeline(t.Context(), TestEnv, timeline.TimelineOptions{Scenes: []string{l8, l7}, Confirm: timeline.ConfirmNone, SharedOptions: series.SharedOptions{Input: toa, Out: filepath.Join(dir, "t")}}); err != nil {
		t.Fatal(err)
	}
	_, z, _ := ReadImage(t, filepath.Join(dir, "c", "magnitude.tif"), tiles.Tile{})
	_, zt, _ := ReadImage(t, filepath.Join(dir, "t", "max-magnitude.tif"), tiles.Tile{})
	_, flags, _ := ReadImage(t, filepath.Join(dir, "c", "change.tif"), tiles.Tile{})
	_, steps, _ := ReadImage(t, filepath.Join(dir, "t", "steps.tif"), tiles.Tile{})
	changed := 0
	for i := range z {
		if z[i] != zt[2*i] && !(z[i] != z[i] && zt[2*i] != zt[2*i]) {
			t.Fatalf("pixel %d: Z %v by change, %v by timeline", i, z[i], zt[2*i])
		}
		want := map[float64]float64{0: 0, 1: 2, 255: 255}[flags[i]]
		if steps[i] != want {
			t.Fatalf("pixel %d: change.tif %v, steps.tif %v", i, flags[i], steps[i])
		}
		if flags[i] == 1 {
			changed++
		}
	}
	t.Logf("%d of %d pixels changed in both", changed, len(z))
}

func mkdir(t *testing.T, parts ...string) string {
	t.Helper()
	p := filepath.Join(parts...)
	if err := os.MkdirAll(p, 0o755); err != nil {
		t.Fatal(err)
	}
	return p
}

// TestTimelinePartialReturnLeavesNoPatchUnderTheUnit: three dates of the
// real Landsat 7 subset, each with its own noise (NoisyCopy). Date 2 brightens
// two blocks; date 3 keeps block B brightened but returns block A to its
// first state except for an L of 3 pixels. Confirmation of step 1 by the
// skip (1, 3) therefore cuts block A down to 3 pixels after the sieve ran,
// and those must go: no confirmed 8-connected patch of any step in
// steps.tif may be smaller than the 4-pixel unit, and block B (64 pixels)
// stays confirmed (all known by construction).
func TestTimelinePartialReturnLeavesNoPatchUnderTheUnit(t *testing.T) {
	NeedLandsat(t)
	dir := t.TempDir()
	type block struct{ x, y, w, h int }
	blockA, blockB := block{100, 100, 10, 10}, block{50, 200, 8, 8}
	lShape := [][2]int{{100, 100}, {101, 100}, {100, 101}}
	date := func(name string, seed uint64, brighten func(x, y int) bool) string {
		path, noisy := filepath.Join(dir, name), filepath.Join(dir, "noisy-"+name)
		NoisyCopy(t, noisy, seed, 0)
		s, buf, _ := ReadImage(t, noisy, tiles.Tile{})
		p := s.Len()
		for y := range s.Height {
			for x := range s.Width {
				if brighten(x, y) {
					for b := range p {
						buf[(y*s.Width+x)*p+b] += 40
					}
				}
			}
		}
		WriteRasterFile(t, path, raster.Spec{Grid: s.Grid, Bands: p, DataType: "Float32"}, buf)
		return path
	}
	in := func(b block, x, y int) bool { return x >= b.x && x < b.x+b.w && y >= b.y && y < b.y+b.h }
	d1 := date("site-2001.tif", 1, func(int, int) bool { return false })
	d2 := date("site-2002.tif", 2, func(x, y int) bool { return in(blockA, x, y) || in(blockB, x, y) })
	d3 := date("site-2003.tif", 3, func(x, y int) bool {
		return in(blockB, x, y) || slices.Contains(lShape, [2]int{x, y})
	})
	out := filepath.Join(dir, "tl")
	res, err := timeline.Timeline(t.Context(), TestEnv, timeline.TimelineOptions{Scenes: []string{d1, d2, d3}, SharedOptions: series.SharedOptions{Out: out,
		MinArea: jobkit.MinArea{Px: 4}}})
	if err != nil {
		t.Fatal(err)
	}
	s, buf, valid := ReadImage(t, filepath.Join(out, "steps.tif"), tiles.Tile{})
	for q := range s.Len() {
		confirmed := make([]bool, s.Width*s.Height)
		for i := range confirmed {
			confirmed[i] = valid[i] && buf[i*s.Len()+q] == timeline.StepConfirmed
		}
		sizes := patchSizes(confirmed, s.Width, s.Height)
		for _, n := range sizes {
			if n < 4 {
				t.Errorf("step %d: a confirmed patch of %d pixels, under the 4-pixel unit (patches %v)", q+1, n, sizes)
			}
		}
		if q > 0 {
			continue
		}
		var inA, inB int
		for i, c := range confirmed {
			x, y := i%s.Width, i/s.Width
			if c && in(blockA, x, y) {
				inA++
			}
			if c && in(blockB, x, y) {
				inB++
			}
		}
		if inA != 0 || inB < 60 {
			t.Errorf("step 1 confirms %d pixels of block A (want 0: 3 pixels last) and %d of block B (want about 64)", inA, inB)
		}
	}
	t.Logf("confirmed pixels %d, patches %d", res.ChangedPixels, res.Patches)
}

// patchSizes are the sizes of the 8-connected patches of set pixels.
func patchSizes(set []bool, w, h int) []int {
	seen := make([]bool, len(set))
	var sizes []int
	for start := range set {
		if !set[start] || seen[start] {
			continue
		}
		n, stack := 0, []int{start}
		seen[start] = true
		for len(stack) > 0 {
			i := stack[len(stack)-1]
			stack = stack[:len(stack)-1]
			n++
			x, y := i%w, i/w
			for dy := -1; dy <= 1; dy++ {
				for dx := -1; dx <= 1; dx++ {
					nx, ny := x+dx, y+dy
					if nx < 0 || ny < 0 || nx >= w || ny >= h {
						continue
					}
					if j := ny*w + nx; set[j] && !seen[j] {
						seen[j] = true
						stack = append(stack, j)
					}
				}
			}
		}
		sizes = append(sizes, n)
	}
	return sizes
}

// TestNoOutputOverTheMTL: learn and fold never write over the *_MTL.txt
// their stack read (for calibration or wavelengths), even with
// --overwrite: the MTL joins the same-file refusal (known by construction:
// the output is named as the MTL).
func TestNoOutputOverTheMTL(t *testing.T) {
	dir := t.TempDir()
	stack := productStack(t, dir, l8Product, "2", "3", "4")
	mtl := filepath.Join(dir, l8Product+"_MTL.txt")
	before, err := os.ReadFile(mtl)
	if err != nil {
		t.Fatal(err)
	}
	basis := filepath.Join(dir, "b.json")
	Learn(t, TestEnv, learn.LearnOptions{Scenes: []string{stack}, Out: basis})
	_, err = learn.Learn(t.Context(), TestEnv, learn.LearnOptions{Scenes: []string{stack}, Out: mtl, Overwrite: true, Variance: DefaultVariance,
		Input: jobkit.Input{Calibrate: raster.CalibrateTOA}})
	WantError(t, "learn over the MTL", err, false, "same file as metadata file")
	_, err = fold.Fold(t.Context(), TestEnv, fold.FoldOptions{Scenes: []string{stack}, Basis: basis, Out: mtl, Overwrite: true})
	WantError(t, "fold over the MTL", err, false, "same file as metadata file")
	if after, err := os.ReadFile(mtl); err != nil || string(after) != string(before) {
		t.Errorf("the MTL changed: %v", err)
	}
}
