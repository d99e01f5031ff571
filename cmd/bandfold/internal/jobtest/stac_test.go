package jobtest

import (
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"reflect"
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
	"bandfold/tiles/testenv"
)

// The STAC fixtures of make testdata (scripts/stac.sh): a STAC 1.0.0 Item
// for each of the two real Landsat Level-1 scenes, in a folder of its own
// beside (hard links to) the scene's band files, and an ItemCollection of
// both (testdata/README.md).
const stacDir = "../../../../testdata/external/stac"

// stacRefl are the eo common names of the six reflective bands Landsat 7
// ETM+ and Landsat 8 OLI share (asset keys of the fixtures too).
var stacRefl = []string{"blue", "green", "red", "nir08", "swir16", "swir22"}

// stacItem is the fixture item of a Landsat product.
func stacItem(t *testing.T, product string) string {
	t.Helper()
	p := filepath.Join(stacDir, product, product+".json")
	testenv.NeedFile(t, p, "make testdata")
	return p
}

// stacCollection is the fixture ItemCollection of both products.
func stacCollection(t *testing.T) string {
	t.Helper()
	p := filepath.Join(stacDir, "landsat-items.json")
	testenv.NeedFile(t, p, "make testdata")
	return p
}

// itemFiles joins the band files the fixture item of product points at.
func itemFiles(product string, bands ...string) string {
	var paths []string
	for _, b := range bands {
		paths = append(paths, filepath.Join(stacDir, product, product+"_B"+b+".TIF"))
	}
	return strings.Join(paths, ",")
}

// itemCopy writes the fixture item of product into dir as name (see
// STACItemCopy).
func itemCopy(t *testing.T, dir, name, product string, edit ...string) string {
	t.Helper()
	return STACItemCopy(t, stacItem(t, product), filepath.Join(dir, name), edit...)
}

// TestSTACItemEqualsStack: learn on a STAC item with --assets gives, bit for
// bit, the basis of learn --stack on the files those assets point at
// (known by construction: the same pixels in the same order; the
// fingerprint hashes every number of the fit), whether the assets are
// picked by eo common name, by key or eo:bands name, as a member of an
// ItemCollection or over HTTP; the wavelengths are the eo:bands centres,
// equal to those the MTL route gives (the Landsat 8 handbook's band
// edges, raster's band table).
func TestSTACItemEqualsStack(t *testing.T) {
	dir := t.TempDir()
	item := stacItem(t, l8Product)
	want := Learn(t, TestEnv, learn.LearnOptions{Scenes: []string{itemFiles(l8Product, l8Reflective...)}, Out: filepath.Join(dir, "stack.json")}).Basis
	remoteConfig(t)
	srv := newImageServer(t, stacDir, 0, false)
	remote := srv.URL + "/" + l8Product + "/" + l8Product + ".json"
	// A STAC API serves an item at a URL without extension, its hrefs
	// absolute URLs (here to the first server).
	api := mkdir(t, dir, "api", "collections", "landsat", "items")
	copied := itemCopy(t, api, l8Product, l8Product)
	data, err := os.ReadFile(copied)
	if err != nil {
		t.Fatal(err)
	}
	abs := filepath.ToSlash(mustAbs(t, filepath.Join(stacDir, l8Product)))
	if err := os.WriteFile(copied, []byte(strings.ReplaceAll(string(data), abs, srv.URL+"/"+l8Product)), 0o644); err != nil {
		t.Fatal(err)
	}
	apiSrv := newImageServer(t, filepath.Join(dir, "api"), 0, false)
	cases := []struct {
		name, scene string
		assets      []string
	}{
		{"common names", item, stacRefl},
		{"keys and band names", item, []string{"blue", "B3", "red", "B5", "swir16", "B7"}},
		{"member of an ItemCollection", stacCollection(t) + "#" + l8Product, stacRefl},
		{"over HTTP", remote, stacRefl},
		{"from a STAC API", apiSrv.URL + "/collections/landsat/items/" + l8Product, stacRefl},
	}
	for _, tc := range cases {
		got := Learn(t, TestEnv, learn.LearnOptions{Scenes: []string{tc.scene}, Input: jobkit.Input{Assets: tc.assets},
			Out: filepath.Join(dir, strings.ReplaceAll(tc.name, " ", "-")+".json")}).Basis
		if got.Fingerprint() != want.Fingerprint() || !reflect.DeepEqual(got.Eigenvalues, want.Eigenvalues) || !reflect.DeepEqual(got.Mean, want.Mean) {
			t.Errorf("%s: eigenvalues %v, means %v; learn --stack gives %v, %v", tc.name, got.Eigenvalues, got.Mean, want.Eigenvalues, want.Mean)
		}
		if !reflect.DeepEqual(got.WavelengthsNM, want.WavelengthsNM) || len(got.WavelengthsNM) != 6 {
			t.Errorf("%s: wavelengths %v, the MTL route gives %v", tc.name, got.WavelengthsNM, want.WavelengthsNM)
		}
		var names []string
		for _, b := range got.Bands {
			names = append(names, b.Name)
		}
		if !slices.Equal(names, stacRefl) {
			t.Errorf("%s: bands named %v, want the asset keys %v", tc.name, names, stacRefl)
		}
	}
	// Over HTTP, GDAL read the item and the six band files, and nothing
	// else (no MTL, folder listing or sidecar probe).
	var names []string
	for _, b := range append([]string{""}, l8Reflective...) {
		n := l8Product + "/" + l8Product + "_B" + b + ".TIF"
		if b == "" {
			n = l8Product + "/" + l8Product + ".json"
		}
		names = append(names, n)
	}
	onlyImages(t, srv, names...)
}

func mustAbs(t *testing.T, p string) string {
	t.Helper()
	abs, err := filepath.Abs(p)
	if err != nil {
		t.Fatal(err)
	}
	return abs
}

// TestSTACSeries: timeline over an ItemCollection and a third item dates
// every scene from its properties.datetime without --dates (known by
// construction: the fixtures' datetimes come from the MTLs' DATE_ACQUIRED,
// the third item's is the test's own, and its file name holds no date),
// matching the Landsat 7 and 8 bands picked by common name; change on two
// members of the collection does the same for a pair, and without --assets
// matches the items' bands by their eo:bands wavelengths.
func TestSTACSeries(t *testing.T) {
	dir := t.TempDir()
	third := mkdir(t, dir, "third")
	for _, b := range append(slices.Clone(l8Reflective), "MTL") {
		name := l8Product + "_B" + b + ".TIF"
		if b == "MTL" {
			name = l8Product + "_MTL.txt"
		}
		CopyFile(t, filepath.Join(stacDir, l8Product, name), filepath.Join(third, name))
	}
	data, err := os.ReadFile(stacItem(t, l8Product))
	if err != nil {
		t.Fatal(err)
	}
	doc := strings.Replace(strings.Replace(string(data), `"2013-07-07T10:17:42.166196Z"`, `"2016-07-10T10:17:00Z"`, 1), `"id": "`+l8Product+`"`, `"id": "third"`, 1)
	thirdItem := filepath.Join(third, "scene.json")
	if err := os.WriteFile(thirdItem, []byte(doc), 0o644); err != nil {
		t.Fatal(err)
	}
	res, err := timeline.Timeline(t.Context(), TestEnv, timeline.TimelineOptions{Scenes: []string{thirdItem, stacCollection(t)}, SharedOptions: series.SharedOptions{Input: jobkit.Input{Assets: stacRefl}, Out: filepath.Join(dir, "tl")}})
	if err != nil {
		t.Fatal(err)
	}
	var dates []string
	for _, s := range res.Scenes {
		dates = append(dates, s.Date)
		if s.DateSource != raster.STACDateSource {
			t.Errorf("%s dated from %s, want %s", s.Path, s.DateSource, raster.STACDateSource)
		}
	}
	if want := []string{"2001-07-30", "2013-07-07", "2016-07-10"}; !slices.Equal(dates, want) {
		t.Errorf("dates %v, want %v", dates, want)
	}
	coll := stacCollection(t)
	ch := RunChange(t, TestEnv, pairchange.ChangeOptions{Before: coll + "#" + l7Product, After: coll + "#" + l8Product, SharedOptions: series.SharedOptions{Input: jobkit.Input{Assets: stacRefl}, Out: filepath.Join(dir, "change")}})
	if ch.BeforeDate != "2001-07-30" || ch.AfterDate != "2013-07-07" {
		t.Errorf("change dates %s and %s, want 2001-07-30 and 2013-07-07 from the items", ch.BeforeDate, ch.AfterDate)
	}
	// Without --assets, every data asset: the bands are matched by their
	// eo:bands wavelengths (Landsat 7 blue 450-515 nm with Landsat 8 blue
	// 452-512 nm, not coastal 435-451 nm; the handbooks' band edges), the
	// 15 m pan band warped onto 30 m.
	all := RunChange(t, TestEnv, pairchange.ChangeOptions{Before: stacItem(t, l7Product), After: stacItem(t, l8Product), SharedOptions: series.SharedOptions{Align: true, Out: filepath.Join(dir, "all")}})
	if !strings.Contains(all.BandMatch, "landsat-7 band B1 = landsat-8 band B2") || strings.Contains(all.BandMatch, "landsat-8 band B1;") ||
		strings.Contains(all.BandMatch, "landsat-8 band B9") {
		t.Errorf("band match %q: want blue with blue, and no coastal or cirrus band", all.BandMatch)
	}
}

// TestSTACCollections: where several images are taken, an ItemCollection
// and a folder of item files stand for their items: pooled learn on the
// collection equals learn on its two items (known by construction), and a
// batch fold writes one output per item, named by its id.
func TestSTACCollections(t *testing.T) {
	dir := t.TempDir()
	in := jobkit.Input{Assets: stacRefl}
	pooled := Learn(t, TestEnv, learn.LearnOptions{Scenes: []string{stacCollection(t)}, Input: in, Out: filepath.Join(dir, "pooled.json")}).Basis
	two := Learn(t, TestEnv, learn.LearnOptions{Scenes: []string{stacItem(t, l7Product), stacItem(t, l8Product)}, Input: in, Out: filepath.Join(dir, "two.json")}).Basis
	if pooled.Fingerprint() != two.Fingerprint() || pooled.Pixels != 2*41*41 {
		t.Errorf("the collection pooled %d pixels into %s; its items give %d pixels, %s", pooled.Pixels, pooled.Fingerprint(), two.Pixels, two.Fingerprint())
	}
	items := mkdir(t, dir, "items")
	itemCopy(t, items, "a.json", l7Product)
	itemCopy(t, items, "b.json", l8Product)
	if err := os.WriteFile(filepath.Join(items, "catalog.json"), []byte(`{"type": "Catalog", "id": "c", "stac_version": "1.0.0", "description": "d", "links": []}`), 0o644); err != nil {
		t.Fatal(err)
	}
	// Items of a collection are named by their ids, item files by their
	// names.
	for _, tc := range []struct {
		scene string
		stems []string
	}{{stacCollection(t), []string{l7Product, l8Product}}, {items, []string{"a", "b"}}} {
		out := filepath.Join(dir, "folded-"+filepath.Base(tc.scene))
		sum, err := fold.FoldBatch(t.Context(), TestEnv, fold.FoldOptions{Scenes: []string{tc.scene}, Input: in, Basis: filepath.Join(dir, "pooled.json"), OutDir: out})
		if err != nil || sum.Written != 2 {
			t.Fatalf("fold %s: %+v, %v", tc.scene, sum, err)
		}
		for _, stem := range tc.stems {
			if _, err := os.Stat(filepath.Join(out, stem+".components.tif")); err != nil {
				t.Error(err)
			}
		}
	}
}

// TestSTACFoldUnfold: learn, fold and unfold --compare take an item as
// they take the stack of its files, with the same result (known by
// construction: the same pixels), the compression ratio measured on the
// asset files.
func TestSTACFoldUnfold(t *testing.T) {
	dir := t.TempDir()
	var got []*fold.UnfoldResult
	for i, tc := range []struct {
		scene string
		in    jobkit.Input
	}{{stacItem(t, l7Product), jobkit.Input{Assets: stacRefl}}, {itemFiles(l7Product, l7Reflective...), jobkit.Input{}}} {
		name := func(f string) string { return filepath.Join(dir, fmt.Sprintf(f, i)) }
		Learn(t, TestEnv, learn.LearnOptions{Scenes: []string{tc.scene}, Input: tc.in, Out: name("b%d.json")})
		Fold(t, TestEnv, fold.FoldOptions{Scenes: []string{tc.scene}, Input: tc.in, Basis: name("b%d.json"), Out: name("c%d.tif")})
		res, err := fold.Unfold(t.Context(), TestEnv, fold.UnfoldOptions{Components: name("c%d.tif"), Basis: name("b%d.json"), Out: name("u%d.tif"),
			Compare: tc.scene, Input: tc.in})
		if err != nil {
			t.Fatal(err)
		}
		got = append(got, res)
	}
	if got[0].RMSE != got[1].RMSE || got[0].OriginalDeflateBytes != got[1].OriginalDeflateBytes || got[0].OriginalDeflateBytes == 0 {
		t.Errorf("unfold of the item: RMSE %g, DEFLATE %d bytes; of its files: %g, %d", got[0].RMSE, got[0].OriginalDeflateBytes, got[1].RMSE, got[1].OriginalDeflateBytes)
	}
}

// TestSTACBadInputs: each bad item is refused in one line naming the item
// and the asset, a usage error only where the command line is wrong
// (exit 2; otherwise 1), and nothing is written. Over HTTP, an item whose
// hrefs point at local files is refused before anything is opened, though
// the files exist and would be read (a remote catalogue must never make
// bandfold read the user's own files).
func TestSTACBadInputs(t *testing.T) {
	dir := t.TempDir()
	l8 := stacItem(t, l8Product)
	broken := itemCopy(t, dir, "broken.json", l8Product, l8Product+"_B4.TIF", "missing_B4.TIF")
	undated := itemCopy(t, dir, "undated.json", l8Product, `"datetime": "2013-07-07T10:17:42.166196Z"`, `"datetime": null`)
	remoteConfig(t)
	served := mkdir(t, dir, "served")
	localB2, err := filepath.Abs(filepath.Join(stacDir, l8Product, l8Product+"_B2.TIF"))
	if err != nil {
		t.Fatal(err)
	}
	for name, href := range map[string]string{"absolute.json": localB2, "fileurl.json": "file://" + filepath.ToSlash(localB2),
		"climbing.json": "../../" + l8Product + "/" + l8Product + "_B2.TIF"} {
		itemCopy(t, served, name, l8Product, `"href": "`+filepath.ToSlash(filepath.Dir(localB2))+"/"+l8Product+"_B2.TIF", `"href": "`+href)
	}
	srv := newImageServer(t, served, 0, false)
	out := filepath.Join(dir, "out.json")
	learnOn := func(scene string, in jobkit.Input) error {
		_, err := learn.Learn(t.Context(), TestEnv, learn.LearnOptions{Scenes: []string{scene}, Input: in, Out: out, Variance: DefaultVariance})
		return err
	}
	type badItem struct {
		name  string
		run   func() error
		usage bool
		want  []string
		local bool // the refusal of an href reaching a local file
	}
	cases := []badItem{
		{"broken href", func() error { return learnOn(broken, jobkit.Input{Assets: stacRefl}) }, false,
			[]string{broken, "asset red", "missing_B4.TIF", "no such file"}, false},
		{"asset on another grid", func() error { return learnOn(l8, jobkit.Input{Assets: []string{"blue", "green", "pan"}}) }, false,
			[]string{l8, "asset pan", "not on the grid of asset blue", "--align"}, false},
		{"no datetime in a series", func() error {
			_, err := timeline.Timeline(t.Context(), TestEnv, timeline.TimelineOptions{Scenes: []string{stacItem(t, l7Product), l8, undated}, SharedOptions: series.SharedOptions{Input: jobkit.Input{Assets: stacRefl}, Out: filepath.Join(dir, "tl")}})
			return err
		}, false, []string{undated, "properties.datetime is null", "--dates"}, false},
		{"no such asset", func() error { return learnOn(l8, jobkit.Input{Assets: []string{"blue", "nir99"}}) }, true,
			[]string{l8, "no asset nir99", "nir08"}, false},
		{"--assets on a raster", func() error { return learnOn(itemFiles(l8Product, "2", "3"), jobkit.Input{Assets: []string{"blue"}}) }, true,
			[]string{"is not a STAC item"}, false},
		{"no such member", func() error { return learnOn(stacCollection(t)+"#nope", jobkit.Input{Assets: stacRefl}) }, true,
			[]string{"landsat-items.json", `without an item "nope"`}, false},
		{"a collection for one image", func() error {
			_, err := pairchange.Change(t.Context(), TestEnv, pairchange.ChangeOptions{Before: stacCollection(t), After: l8, SharedOptions: series.SharedOptions{Out: filepath.Join(dir, "ch")}})
			return err
		}, true, []string{"is an ItemCollection of 2 items", "#ID"}, false},
	}
	missing := srv.URL + "/collections/landsat/items/nope"
	cases = append(cases, badItem{"remote item missing", func() error { return learnOn(missing, jobkit.Input{Assets: stacRefl}) }, false, []string{missing, "cannot be read"}, false})
	for _, name := range []string{"absolute.json", "fileurl.json", "climbing.json"} {
		url := srv.URL + "/" + name
		cases = append(cases, badItem{"remote item, " + name, func() error { return learnOn(url, jobkit.Input{Assets: stacRefl}) }, false, []string{url, "asset blue", "may point only at http(s) URLs"}, true})
	}
	for _, tc := range cases {
		err := tc.run()
		WantError(t, tc.name, err, tc.usage, tc.want...)
		if err != nil && strings.Contains(err.Error(), "\n") {
			t.Errorf("%s: error on several lines: %q", tc.name, err)
		}
		if tc.local && !errors.Is(err, raster.ErrLocalHref) {
			t.Errorf("%s: %v is not ErrLocalHref", tc.name, err)
		}
		MustNotExist(t, tc.name, out)
		MustNotExist(t, tc.name, filepath.Join(dir, "tl"))
		MustNotExist(t, tc.name, filepath.Join(dir, "ch"))
	}
	// With --align, the 15 m band is warped onto the 30 m grid.
	if err := learnOn(l8, jobkit.Input{Assets: []string{"blue", "green", "pan"}, Align: true}); err != nil {
		t.Errorf("--align: %v", err)
	}
}
