package main

import (
	"net/http"
	"net/http/httptest"
	"os"
	"path/filepath"
	"testing"

	"bandfold/cmd/bandfold/internal/jobtest"
)

// The STAC item fixtures of make testdata (scripts/stac.sh).
const (
	stacDir     = "../../testdata/external/stac"
	stacL7      = "LE07_L1TP_195025_20010730_20170204_01_T1"
	stacL8      = "LC08_L1TP_195025_20130707_20170503_01_T1"
	stacL8Red   = stacL8 + "_B4.TIF"
	stacL8Blue  = stacL8 + "_B2.TIF"
	stacRefl    = "blue,green,red,nir08,swir16,swir22"
	stacL8Stamp = `"datetime": "2013-07-07T10:17:42.166196Z"`
)

// TestSTACBadInputs runs learn and timeline on bad STAC items as
// TestBadInputs does for other inputs: exit 2 where the command line is
// wrong (an asset or item it names does not exist, --assets malformed or
// given for a raster), 1 where the item is (a broken href, an asset on
// another grid without --align, no datetime in a series, and, over HTTP,
// hrefs reaching local files); one line on stderr naming the item and the
// asset; nothing written. Known by construction: each item is a fixture
// copy with the one fault its case names.
func TestSTACBadInputs(t *testing.T) {
	dir := t.TempDir()
	p := func(name string) string { return filepath.Join(dir, name) }
	src := func(product string) string { return filepath.Join(stacDir, product, product+".json") }
	l7, l8 := jobtest.STACItemCopy(t, src(stacL7), p("l7.json")), jobtest.STACItemCopy(t, src(stacL8), p("l8.json"))
	broken := jobtest.STACItemCopy(t, src(stacL8), p("broken.json"), stacL8Red, "missing_B4.TIF")
	undated := jobtest.STACItemCopy(t, src(stacL8), p("undated.json"), stacL8Stamp, `"datetime": null`)
	served := p("served")
	if err := os.Mkdir(served, 0o755); err != nil {
		t.Fatal(err)
	}
	blue, err := filepath.Abs(filepath.Join(stacDir, stacL8, stacL8Blue))
	if err != nil {
		t.Fatal(err)
	}
	jobtest.STACItemCopy(t, src(stacL8), filepath.Join(served, "item.json"), `"href": "`+filepath.ToSlash(blue), `"href": "file://`+filepath.ToSlash(blue))
	t.Setenv("no_proxy", "127.0.0.1")
	t.Setenv("NO_PROXY", "127.0.0.1")
	t.Setenv("GDAL_HTTP_MAX_RETRY", "0")
	srv := httptest.NewServer(http.FileServer(http.Dir(served))) // on 127.0.0.1
	t.Cleanup(srv.Close)
	out, tl := p("out/basis.json"), p("out/tl")
	learn := func(scene string, extra ...string) []string {
		return append([]string{"learn", scene, "--out", out}, extra...)
	}
	tests := []badCase{
		{"broken href", learn(broken, "--assets", stacRefl), 1, []string{broken, "asset red", "missing_B4.TIF", "no such file"}},
		{"asset on another grid", learn(l8, "--assets", "blue,pan"), 1, []string{l8, "asset pan", "not on the grid of asset blue", "--align"}},
		{"no datetime in a series", []string{"timeline", l7, l8, undated, "--assets", stacRefl, "--out", tl}, 1,
			[]string{undated, "properties.datetime is null", "--dates"}},
		{"remote item with a file: href", learn(srv.URL+"/item.json", "--assets", stacRefl), 1,
			[]string{srv.URL + "/item.json", "asset blue", "file://", "may point only at http(s) URLs"}},
		{"no such asset", learn(l8, "--assets", "blue,nir99"), 2, []string{l8, "no asset nir99"}},
		{"assets empty item", learn(l8, "--assets", "blue,,red"), 2, []string{`--assets "blue,,red"`, "empty item"}},
		{"assets on a raster", learn(filepath.Join(stacDir, stacL8, stacL8Blue), "--assets", "blue"), 2, []string{stacL8Blue, "is not a STAC item"}},
		{"no such item", learn(p("missing.json")), 2, []string{p("missing.json"), "no such file"}},
		{"no such member", learn(filepath.Join(stacDir, "landsat-items.json") + "#nope"), 2, []string{"landsat-items.json", `"nope"`}},
	}
	checkBadCases(t, dir, tests)
}
