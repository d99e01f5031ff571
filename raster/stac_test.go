package raster

import (
	"encoding/json"
	"errors"
	"os"
	"path/filepath"
	"reflect"
	"slices"
	"strings"
	"testing"

	"bandfold/tiles/testenv"
)

// stacItemJSON is a STAC 1.0.0 Item as the Item Specification (stac-spec
// v1.0.0, item-spec/item-spec.md) and the eo extension v1.0.0 write one:
// its assets in an order that is not alphabetical, a multiband asset, a
// metadata asset and two assets sharing a common name.
const stacItemJSON = `{
  "type": "Feature", "stac_version": "1.0.0", "id": "scene-1",
  "stac_extensions": ["https://stac-extensions.github.io/eo/v1.0.0/schema.json"],
  "geometry": null,
  "properties": {"datetime": "2013-07-07T10:17:42.166196Z", "platform": "landsat-8"},
  "links": [],
  "assets": {
    "red": {"href": "./B4.TIF", "type": "image/tiff; application=geotiff", "roles": ["data"],
            "eo:bands": [{"name": "B4", "common_name": "red", "center_wavelength": 0.6545, "full_width_half_max": 0.037}]},
    "blue": {"href": "B2.TIF", "type": "image/tiff; application=geotiff", "roles": ["data"],
             "eo:bands": [{"name": "B2", "common_name": "blue", "center_wavelength": 0.482, "full_width_half_max": 0.06}]},
    "visual": {"href": "https://example.com/tci.tif", "type": "image/tiff", "roles": ["visual"],
               "eo:bands": [{"name": "B4", "common_name": "red"}, {"name": "B3", "common_name": "green"}, {"name": "B2", "common_name": "blue"}]},
    "lwir-low": {"href": "B6_1.TIF", "roles": ["data"], "eo:bands": [{"name": "B6", "common_name": "lwir"}]},
    "lwir-high": {"href": "B6_2.TIF", "roles": ["data"], "eo:bands": [{"name": "B6", "common_name": "lwir"}]},
    "mtl": {"href": "MTL.txt", "type": "text/plain", "roles": ["metadata"]}
  }
}`

// TestParseSTAC: the fields read from an Item and an ItemCollection
// (known by construction: stacItemJSON), and one-line refusals naming
// what is wrong, in the spec's field names, never encoding/json's words.
func TestParseSTAC(t *testing.T) {
	items, coll, err := ParseSTAC([]byte(stacItemJSON), "cat/item.json")
	if err != nil || coll || len(items) != 1 {
		t.Fatalf("ParseSTAC: %v, %v, %v", items, coll, err)
	}
	it := items[0]
	var keys []string
	for _, a := range it.Assets {
		keys = append(keys, a.Key)
	}
	if want := []string{"red", "blue", "visual", "lwir-low", "lwir-high", "mtl"}; !slices.Equal(keys, want) {
		t.Errorf("asset keys %v, want the item's order %v", keys, want)
	}
	if it.ID != "scene-1" || it.Datetime != "2013-07-07T10:17:42.166196Z" || it.Platform != "landsat-8" {
		t.Errorf("item %+v", it)
	}
	if b := it.Assets[0].Bands[0]; b.CommonName != "red" || b.CentreUM != 0.6545 || b.FWHMUM != 0.037 {
		t.Errorf("red eo:bands %+v", b)
	}
	coll1 := `{"type": "FeatureCollection", "features": [` + stacItemJSON + `, ` + strings.Replace(stacItemJSON, `"scene-1"`, `"scene-2"`, 1) + `]}`
	items, coll, err = ParseSTAC([]byte(coll1), "items.json")
	if err != nil || !coll || len(items) != 2 || items[1].Name() != "items.json#scene-2" {
		t.Errorf("ItemCollection: %v, %v, %v", items, coll, err)
	}
	bad := []struct{ name, doc, want string }{
		{"not JSON", `{"type": "Feature",`, "the JSON ends early"},
		{"a catalog", `{"type": "Catalog", "id": "c"}`, "is a STAC Catalog, not an item"},
		{"GeoJSON of another kind", `{"type": "Point"}`, `its "type" is "Point"`},
		{"no id", strings.Replace(stacItemJSON, `"id": "scene-1",`, "", 1), `no "id"`},
		{"no assets", `{"type": "Feature", "stac_version": "1.0.0", "id": "x", "properties": {}}`, `no "assets"`},
		{"empty assets", `{"type": "Feature", "stac_version": "1.0.0", "id": "x", "properties": {}, "assets": {}}`, `"assets" is empty`},
		{"no href", strings.Replace(stacItemJSON, `"href": "MTL.txt", `, "", 1), `asset "mtl" has no "href"`},
		{"datetime a number", strings.Replace(stacItemJSON, `"2013-07-07T10:17:42.166196Z"`, "2013", 1), "properties.datetime must be a string, got a JSON number"},
		{"wavelength a string", strings.Replace(stacItemJSON, `0.482`, `"0.482"`, 1), `asset "blue": eo:bands.center_wavelength must be a number, got a JSON string`},
		{"negative wavelength", strings.Replace(stacItemJSON, `0.482`, `-0.482`, 1), "eo:bands[0].center_wavelength = -0.482"},
		{"an asset twice", strings.Replace(stacItemJSON, `"lwir-high"`, `"lwir-low"`, 1), `names the asset "lwir-low" twice`},
		{"empty collection", `{"type": "FeatureCollection", "features": []}`, "holds no items"},
		{"one id twice", `{"type": "FeatureCollection", "features": [` + stacItemJSON + `,` + stacItemJSON + `]}`, "two items have the id scene-1"},
	}
	for _, tc := range bad {
		_, _, err := ParseSTAC([]byte(tc.doc), "item.json")
		if err == nil || !strings.Contains(err.Error(), tc.want) || !strings.HasPrefix(err.Error(), "item.json") ||
			strings.Contains(err.Error(), "unmarshal") || strings.Contains(err.Error(), "Go ") || strings.Contains(err.Error(), "\n") {
			t.Errorf("%s: got %v, want one line naming item.json with %q", tc.name, err, tc.want)
		}
	}
}

// TestPickAssets: --assets by key, common name or eo:bands name, in the
// order given; the data assets (role "data") by default; refusals saying
// why (known by construction: stacItemJSON).
func TestPickAssets(t *testing.T) {
	items, _, err := ParseSTAC([]byte(stacItemJSON), "item.json")
	if err != nil {
		t.Fatal(err)
	}
	it := items[0]
	tests := []struct {
		names []string
		want  []string // keys, or nil for an error
		err   string
		spec  error
	}{
		{nil, []string{"red", "blue", "lwir-low", "lwir-high"}, "", nil},
		{[]string{"blue", "red"}, []string{"blue", "red"}, "", nil},
		{[]string{"B2", "RED", "mtl"}, []string{"blue", "red", "mtl"}, "", nil},
		{[]string{"lwir-high"}, []string{"lwir-high"}, "", nil},
		{[]string{"lwir"}, nil, "lwir names the bands of several assets (lwir-low, lwir-high)", ErrBandRange},
		{[]string{"green"}, nil, "the asset visual holds it as band 2 of 3", ErrBandRange},
		{[]string{"nir08"}, nil, "no asset nir08, by key or eo:bands name (its assets: red, blue, visual", ErrBandRange},
		{[]string{"red", "B4"}, nil, `picks the asset red twice`, ErrBadSpec},
	}
	for _, tc := range tests {
		got, err := it.pickAssets(tc.names)
		if tc.want == nil {
			if err == nil || !strings.Contains(err.Error(), tc.err) || !errors.Is(err, tc.spec) {
				t.Errorf("%v: got %v, want an error with %q", tc.names, err, tc.err)
			}
			continue
		}
		var keys []string
		for _, a := range got {
			keys = append(keys, a.Key)
		}
		if err != nil || !slices.Equal(keys, tc.want) {
			t.Errorf("%v: got %v, %v; want %v", tc.names, keys, err, tc.want)
		}
	}
	noData := strings.ReplaceAll(stacItemJSON, `"data"`, `"overview"`)
	items, _, _ = ParseSTAC([]byte(noData), "item.json")
	if _, err := items[0].pickAssets(nil); err == nil || !strings.Contains(err.Error(), "has no data asset") {
		t.Errorf("no data asset: got %v", err)
	}
}

// TestResolveHref: hrefs resolved against the item's location as RFC 3986
// section 5 resolves references (for items read over HTTP) and as paths
// join (for local items), and every way an item read over the network
// could reach a local file refused with ErrLocalHref.
func TestResolveHref(t *testing.T) {
	const web = "https://example.com/cat/scene/item.json"
	tests := []struct{ location, href, want string }{
		{"cat/item.json", "B4.TIF", filepath.Join("cat", "B4.TIF")},
		{"cat/item.json", "./B4.TIF", filepath.Join("cat", "B4.TIF")},
		{"cat/item.json", "../landsat/B4.TIF", "landsat/B4.TIF"},
		{"cat/item.json", "/data/B4.TIF", "/data/B4.TIF"},
		{"cat/item.json", "file:///data/B4.TIF", "/data/B4.TIF"},
		{"cat/item.json", "B%204.TIF", filepath.Join("cat", "B 4.TIF")},
		{"cat/item.json", "https://example.com/B4.TIF", "/vsicurl/https://example.com/B4.TIF"},
		{"/vsizip/cat.zip/item.json", "B4.TIF", "/vsizip/cat.zip/B4.TIF"},
		{web, "B4.TIF", "/vsicurl/https://example.com/cat/scene/B4.TIF"},
		{web, "./sub/B4.TIF?x=1", "/vsicurl/https://example.com/cat/scene/sub/B4.TIF?x=1"},
		{web, "sub/../B4.TIF", "/vsicurl/https://example.com/cat/scene/B4.TIF"},
		{web, "http://other.example.org/B4.TIF", "/vsicurl/http://other.example.org/B4.TIF"},
		{"/vsicurl/" + web, "B4.TIF", "/vsicurl/https://example.com/cat/scene/B4.TIF"},
		{"/vsis3/bucket/cat/item.json", "B4.TIF", "/vsis3/bucket/cat/B4.TIF"},
		{web, "/etc/passwd", "local"},
		{web, "file:///etc/passwd", "local"},
		{web, "FILE:/etc/passwd", "local"},
		{web, "../../../etc/passwd", "local"},
		{web, "sub/../../B4.TIF", "local"},
		{web, "%2e%2e/%2e%2e/secret.tif", "local"},
		{web, `..\..\secret.tif`, "local"},
		{web, `C:\Users\me\secret.tif`, "local"},
		{web, "/vsimem/secret.tif", "local"},
		{"/vsis3/bucket/cat/item.json", "../../other/B4.TIF", "local"},
		{web, "s3://bucket/B4.TIF", "scheme"},
		{"cat/item.json", "ftp://example.com/B4.TIF", "scheme"},
	}
	for _, tc := range tests {
		got, err := ResolveHref(tc.location, tc.href)
		switch tc.want {
		case "local":
			if !errors.Is(err, ErrLocalHref) {
				t.Errorf("%s from %s: got %q, %v; want ErrLocalHref", tc.href, tc.location, got, err)
			}
		case "scheme":
			if err == nil || !strings.Contains(err.Error(), "is not supported") {
				t.Errorf("%s from %s: got %q, %v; want an unsupported scheme", tc.href, tc.location, got, err)
			}
		default:
			if err != nil || got != tc.want {
				t.Errorf("%s from %s: got %q, %v; want %q", tc.href, tc.location, got, err, tc.want)
			}
		}
	}
}

// TestItemRefs: which arguments are STAC items, the member syntax
// "FILE#ID", and the stem an item of a collection gives output names
// (known by construction).
func TestItemRefs(t *testing.T) {
	tests := []struct {
		arg, file, stem string
		stac            bool
	}{
		{"a/item.json", "a/item.json", "item", true},
		{"a/items.geojson#LC08_X", "a/items.geojson", "LC08_X", true},
		{"https://example.com/search?collections=landsat", "https://example.com/search?collections=landsat", "search?collections=landsat", true},
		{"https://example.com/items.json#b", "https://example.com/items.json#b", "b", true},
		{"a/b#1.tif", "a/b#1.tif", "b#1", false},
		{"/vsicurl/https://example.com/b4.tif", "/vsicurl/https://example.com/b4.tif", "b4", false},
	}
	for _, tc := range tests {
		if IsSTAC(tc.arg) != tc.stac || ItemFile(tc.arg) != tc.file || Stem(tc.arg) != tc.stem {
			t.Errorf("%s: IsSTAC %v, ItemFile %q, Stem %q; want %v, %q, %q", tc.arg, IsSTAC(tc.arg), ItemFile(tc.arg), Stem(tc.arg), tc.stac, tc.file, tc.stem)
		}
	}
}

// TestItemDate: properties.datetime dates an item; a null datetime (the
// spec allows it with start_datetime and end_datetime) or one that is not
// RFC 3339 is ErrNoDate naming the item, and no file name stands in.
func TestItemDate(t *testing.T) {
	dir := t.TempDir()
	tests := []struct{ name, datetime, want string }{
		{"LC08_20130707.json", `"2013-07-07T10:17:42Z"`, "2013-07-07"},
		{"LC08_20130707_null.json", `null, "start_datetime": "2013-01-01T00:00:00Z", "end_datetime": "2013-12-31T23:59:59Z"`, "properties.datetime is null (it spans 2013-01-01T00:00:00Z to 2013-12-31T23:59:59Z)"},
		{"LC08_20130707_bad.json", `"last summer"`, `properties.datetime "last summer" is not an RFC 3339 date-time`},
	}
	for _, tc := range tests {
		p := filepath.Join(dir, tc.name)
		doc := strings.Replace(stacItemJSON, `"2013-07-07T10:17:42.166196Z"`, tc.datetime, 1)
		if err := os.WriteFile(p, []byte(doc), 0o644); err != nil {
			t.Fatal(err)
		}
		d, _, err := SceneDate(p)
		if tc.want == "2013-07-07" {
			if err != nil || d.Label != tc.want || d.Source != STACDateSource {
				t.Errorf("%s: %+v, %v", tc.name, d, err)
			}
			continue
		}
		if !errors.Is(err, ErrNoDate) || !strings.Contains(err.Error(), tc.want) || !strings.HasPrefix(err.Error(), p) {
			t.Errorf("%s: got %v, want ErrNoDate naming the item with %q", tc.name, err, tc.want)
		}
	}
}

// TestOpenSTACItem opens an item of the real Landsat 8 files (make
// testdata, scripts/stac.sh): the bands are named by asset key, take the
// eo:bands wavelengths (the Landsat 8 Data Users Handbook's band edges, as
// the MTL route gives them: known from raster's own band table), and the
// item is a side file.
func TestOpenSTACItem(t *testing.T) {
	id := "LC08_L1TP_195025_20130707_20170503_01_T1"
	item := filepath.Join("../testdata/external/stac", id, id+".json")
	testenv.NeedFile(t, item, "run bash scripts/testdata.sh")
	s, err := Open([]string{item}, SelectAssets([]string{"nir08", "red", "B2"}))
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	mtl, err := Open([]string{filepath.Join(landsatDir, id+"_B5.TIF"), filepath.Join(landsatDir, id+"_B4.TIF"), filepath.Join(landsatDir, id+"_B2.TIF")})
	if err != nil {
		t.Fatal(err)
	}
	defer mtl.Close()
	for i, want := range []string{"nir08", "red", "blue"} {
		b := s.Bands[i]
		r := mtl.Bands[i].Range
		if b.Name != want || b.WavelengthNM != mtl.Bands[i].WavelengthNM || b.Range.LoNM != r.LoNM || b.Range.HiNM != r.HiNM {
			t.Errorf("band %d: %s at %g nm %+v; want %s at %g nm %+v", i+1, b.Name, b.WavelengthNM, b.Range, want, mtl.Bands[i].WavelengthNM, mtl.Bands[i].Range)
		}
	}
	if s.Label != id+" [nir08,red,blue]" || !slices.Contains(s.SideFiles(), item) {
		t.Errorf("label %q, side files %v", s.Label, s.SideFiles())
	}
	if _, err := Open([]string{item, item}); !errors.Is(err, ErrBadSpec) {
		t.Errorf("two items joined with commas: %v", err)
	}
	if _, err := Open([]string{mtl.Paths[0]}, SelectAssets([]string{"red"})); !errors.Is(err, ErrBadSpec) || !strings.Contains(err.Error(), "is not a STAC item") {
		t.Errorf("--assets on a raster: %v", err)
	}
}

// TestFixtureItemsFollowTheSpec: the fixture items of scripts/stac.sh carry
// the fields the STAC 1.0.0 Item Specification requires (type "Feature",
// stac_version, id, geometry, bbox of 4 numbers, properties.datetime,
// links, assets with href), the schema URLs of the extensions they use, and
// those extensions' fields as their specifications type them (eo v1.0.0
// eo:bands with center_wavelength; projection v1.0.0 proj:shape of 2 and
// proj:transform of 6 numbers; raster v1.1.0 raster:bands).
func TestFixtureItemsFollowTheSpec(t *testing.T) {
	coll := "../testdata/external/stac/landsat-items.json"
	testenv.NeedFile(t, coll, "run bash scripts/testdata.sh")
	var fc struct {
		Type     string           `json:"type"`
		Features []map[string]any `json:"features"`
	}
	data, err := os.ReadFile(coll)
	if err != nil || json.Unmarshal(data, &fc) != nil || fc.Type != "FeatureCollection" || len(fc.Features) != 2 {
		t.Fatalf("%s: %v, type %q, %d features", coll, err, fc.Type, len(fc.Features))
	}
	exts := []any{"https://stac-extensions.github.io/eo/v1.0.0/schema.json", "https://stac-extensions.github.io/projection/v1.0.0/schema.json",
		"https://stac-extensions.github.io/raster/v1.1.0/schema.json"}
	for _, it := range fc.Features {
		id, _ := it["id"].(string)
		props, _ := it["properties"].(map[string]any)
		bbox, _ := it["bbox"].([]any)
		_, links := it["links"].([]any)
		_, geometry := it["geometry"].(map[string]any)
		if it["type"] != "Feature" || it["stac_version"] != "1.0.0" || id == "" || !geometry || len(bbox) != 4 || !links ||
			!reflect.DeepEqual(it["stac_extensions"], exts) || props["datetime"] == nil || props["proj:epsg"] != 32632.0 {
			t.Errorf("item %q lacks a field the spec requires: %v", id, it)
		}
		assets, _ := it["assets"].(map[string]any)
		for key, v := range assets {
			a, _ := v.(map[string]any)
			if href, _ := a["href"].(string); href == "" || !strings.HasPrefix(href, "./"+id+"/") {
				t.Errorf("%s asset %s: href %v", id, key, a["href"])
			}
			if a["type"] == "text/plain" {
				continue
			}
			shape, _ := a["proj:shape"].([]any)
			transform, _ := a["proj:transform"].([]any)
			rb, _ := a["raster:bands"].([]any)
			if len(shape) != 2 || len(transform) != 6 || len(rb) != 1 {
				t.Errorf("%s asset %s: proj:shape %v, proj:transform %v, raster:bands %v", id, key, shape, transform, rb)
			}
			if eo, ok := a["eo:bands"].([]any); ok {
				b, _ := eo[0].(map[string]any)
				if c, _ := b["center_wavelength"].(float64); len(eo) != 1 || !(c > 0.4 && c < 13) || b["common_name"] == nil {
					t.Errorf("%s asset %s: eo:bands %v", id, key, eo)
				}
			}
		}
	}
}

// FuzzParseSTAC: the item parser never panics, refuses in one line, and
// what it accepts has an id and assets with hrefs; resolved against a URL,
// an accepted href is an http(s) URL read through /vsicurl/, never a
// local file.
func FuzzParseSTAC(f *testing.F) {
	f.Add([]byte(stacItemJSON))
	f.Add([]byte(`{"type": "FeatureCollection", "features": [` + stacItemJSON + `]}`))
	for _, s := range []string{"", "{}", "null", `{"type": "Feature"}`, `{"type":"Feature","stac_version":"1","id":"x","properties":{},"assets":{"a":{"href":"/etc/passwd"}}}`,
		`{"type":"Feature","stac_version":"1","id":"x","properties":{"datetime":null},"assets":{"a":{"href":"..\\x","eo:bands":[{}]}}}`} {
		f.Add([]byte(s))
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		items, _, err := ParseSTAC(data, "https://example.com/a/item.json")
		if err != nil {
			if strings.Contains(err.Error(), "\n") {
				t.Fatalf("error on several lines: %q", err)
			}
			return
		}
		for _, it := range items {
			if it.ID == "" || len(it.Assets) == 0 {
				t.Fatalf("accepted %+v", it)
			}
			for _, a := range it.Assets {
				p, err := ResolveHref(it.Location, a.Href)
				if err == nil && !(strings.HasPrefix(p, "/vsicurl/") && isURL(strings.TrimPrefix(p, "/vsicurl/"))) {
					t.Fatalf("href %q of a remote item resolved to %q", a.Href, p)
				}
				if a.Href == "" {
					t.Fatalf("accepted an empty href in %+v", a)
				}
			}
		}
	})
}
