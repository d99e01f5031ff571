package raster

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"net/url"
	"path"
	"reflect"
	"slices"
	"strings"
	"unicode"
)

// STAC items as input images. An item is a GeoJSON Feature whose "assets"
// map keys to files ("href"), as the SpatioTemporal Asset Catalog's Item
// Specification 1.0.0 defines it (stac-spec v1.0.0,
// item-spec/item-spec.md: "type" "Feature", "stac_version", "id",
// "properties" with "datetime" (RFC 3339, or null with start_datetime and
// end_datetime), "assets" of Asset Objects with "href", "type", "roles");
// an ItemCollection is a GeoJSON FeatureCollection of items (stac-api-spec,
// ItemCollection). Band metadata comes from the Electro-Optical extension
// (eo v1.0.0: an asset's "eo:bands", each with "name", "common_name",
// "center_wavelength" and "full_width_half_max" in micrometres). Relative
// hrefs resolve against the item's own location (RFC 3986, section 5).

// ErrLocalHref marks an asset href of an item read over the network that
// points at a local file: an absolute path, a file: URL or a relative path
// climbing out of the item's location. A remote catalogue must never make
// bandfold read the user's own files.
var ErrLocalHref = errors.New("an item read over the network may point only at http(s) URLs and at files below its own location")

// maxSTACSize bounds the JSON read for an item or an ItemCollection.
const maxSTACSize = 64 << 20

// STACItem is what bandfold reads of a STAC Item.
type STACItem struct {
	ID string
	// Location is where the item was read (a local path, a GDAL virtual
	// path or an http(s) URL): relative hrefs resolve against it. Member
	// is set for an item of an ItemCollection read at Location.
	Location string
	Member   bool
	// Datetime, Start and End are properties.datetime, start_datetime and
	// end_datetime as written; "" when null or absent.
	Datetime, Start, End string
	// Platform is properties.platform ("landsat-8"), "" when absent.
	Platform string
	// Assets are the item's assets in the order the item lists them.
	Assets []STACAsset
}

// STACAsset is one asset of an item.
type STACAsset struct {
	Key, Href, Type string
	Roles           []string
	// Bands are its eo:bands, one per band of the file, or none.
	Bands []EOBand
}

// EOBand is one entry of an asset's eo:bands (eo extension v1.0.0).
type EOBand struct {
	Name       string
	CommonName string
	// CentreUM and FWHMUM are center_wavelength and full_width_half_max in
	// micrometres, 0 when absent.
	CentreUM, FWHMUM float64
}

// Name names the item in messages: its location, with "#ID" for a member
// of an ItemCollection.
func (it *STACItem) Name() string {
	if it.Member {
		return it.Location + "#" + clean(it.ID)
	}
	return it.Location
}

// clean makes a string read from an item fit a one-line message: control
// characters become '?', and a string longer than 200 characters keeps its
// head and its tail (where an href's file name is).
func clean(s string) string {
	r := []rune(strings.Map(func(r rune) rune {
		if unicode.IsControl(r) {
			return '?'
		}
		return r
	}, strings.ToValidUTF8(s, "?")))
	if len(r) > 200 {
		return string(r[:100]) + "..." + string(r[len(r)-97:])
	}
	return string(r)
}

// stacDoc is the part of an Item or ItemCollection read.
type stacDoc struct {
	Type        string            `json:"type"`
	StacVersion string            `json:"stac_version"`
	ID          string            `json:"id"`
	Properties  *stacProperties   `json:"properties"`
	Assets      json.RawMessage   `json:"assets"`
	Features    []json.RawMessage `json:"features"`
}

type stacProperties struct {
	Datetime *string `json:"datetime"`
	Start    string  `json:"start_datetime"`
	End      string  `json:"end_datetime"`
	Platform string  `json:"platform"`
}

type stacAssetDoc struct {
	Href    string   `json:"href"`
	Type    string   `json:"type"`
	Roles   []string `json:"roles"`
	EOBands []struct {
		Name       string   `json:"name"`
		CommonName string   `json:"common_name"`
		Centre     *float64 `json:"center_wavelength"`
		FWHM       *float64 `json:"full_width_half_max"`
	} `json:"eo:bands"`
}

// ParseSTAC reads a STAC Item, or an ItemCollection of items, from data
// read at location (which names it in errors and is the base of relative
// hrefs). collection reports an ItemCollection. Errors say what in the
// document is wrong, in the spec's field names.
func ParseSTAC(data []byte, location string) (items []*STACItem, collection bool, err error) {
	var doc stacDoc
	if err := json.Unmarshal(data, &doc); err != nil {
		return nil, false, fmt.Errorf("%s: not a STAC item (%s)", location, jsonProblem(err))
	}
	switch doc.Type {
	case "Feature":
		it, err := parseItem(doc, location)
		if err != nil {
			return nil, false, err
		}
		return []*STACItem{it}, false, nil
	case "FeatureCollection":
		items, err := parseCollection(doc.Features, location)
		return items, true, err
	case "Collection", "Catalog":
		return nil, false, fmt.Errorf("%s is a STAC %s, not an item: give its items (their files, or a folder of them)", location, doc.Type)
	}
	return nil, false, fmt.Errorf("%s: not a STAC item: its \"type\" is %q, want \"Feature\" (or \"FeatureCollection\" for an ItemCollection)", location, shorten(doc.Type))
}

// parseCollection reads the features of an ItemCollection.
func parseCollection(features []json.RawMessage, location string) ([]*STACItem, error) {
	if len(features) == 0 {
		return nil, fmt.Errorf("%s: the ItemCollection holds no items", location)
	}
	var out []*STACItem
	for i, raw := range features {
		var doc stacDoc
		if err := json.Unmarshal(raw, &doc); err != nil {
			return nil, fmt.Errorf("%s: features[%d] is not a STAC item (%s)", location, i, jsonProblem(err))
		}
		if doc.Type != "Feature" {
			return nil, fmt.Errorf("%s: features[%d] is not a STAC item: its \"type\" is %q, want \"Feature\"", location, i, shorten(doc.Type))
		}
		it, err := parseItem(doc, fmt.Sprintf("%s features[%d]", location, i))
		if err != nil {
			return nil, err
		}
		if slices.ContainsFunc(out, func(o *STACItem) bool { return o.ID == it.ID }) {
			return nil, fmt.Errorf("%s: two items have the id %s", location, clean(it.ID))
		}
		it.Location, it.Member = location, true
		out = append(out, it)
	}
	return out, nil
}

// parseItem checks the fields of an Item that bandfold needs.
func parseItem(doc stacDoc, location string) (*STACItem, error) {
	bad := func(format string, args ...any) error {
		return fmt.Errorf("%s: not a STAC item: %s", location, fmt.Sprintf(format, args...))
	}
	switch {
	case strings.TrimSpace(doc.StacVersion) == "":
		return nil, bad("no \"stac_version\"")
	case strings.TrimSpace(doc.ID) == "":
		return nil, bad("no \"id\"")
	case doc.Properties == nil:
		return nil, bad("no \"properties\"")
	case len(doc.Assets) == 0 || string(doc.Assets) == "null":
		return nil, bad("no \"assets\"")
	}
	it := &STACItem{ID: doc.ID, Location: location, Start: doc.Properties.Start, End: doc.Properties.End, Platform: doc.Properties.Platform}
	if doc.Properties.Datetime != nil {
		it.Datetime = *doc.Properties.Datetime
	}
	keys, values, err := objectMembers(doc.Assets)
	if err != nil {
		return nil, bad("\"assets\" %s", err)
	}
	if len(keys) == 0 {
		return nil, bad("\"assets\" is empty")
	}
	for i, key := range keys {
		a, err := parseAsset(key, values[i])
		if err != nil {
			return nil, bad("%v", err)
		}
		it.Assets = append(it.Assets, a)
	}
	return it, nil
}

// parseAsset reads one Asset Object.
func parseAsset(key string, raw json.RawMessage) (STACAsset, error) {
	var doc stacAssetDoc
	if err := json.Unmarshal(raw, &doc); err != nil {
		return STACAsset{}, fmt.Errorf("asset %q: %s", clean(key), jsonProblem(err))
	}
	if strings.TrimSpace(doc.Href) == "" {
		return STACAsset{}, fmt.Errorf("asset %q has no \"href\"", clean(key))
	}
	a := STACAsset{Key: key, Href: strings.TrimSpace(doc.Href), Type: doc.Type, Roles: doc.Roles}
	for i, b := range doc.EOBands {
		eo := EOBand{Name: b.Name, CommonName: b.CommonName}
		for _, v := range []struct {
			field string
			from  *float64
			to    *float64
		}{{"center_wavelength", b.Centre, &eo.CentreUM}, {"full_width_half_max", b.FWHM, &eo.FWHMUM}} {
			if v.from != nil && !(*v.from > 0 && *v.from < 1e6) {
				return STACAsset{}, fmt.Errorf("asset %q: eo:bands[%d].%s = %g: want a positive wavelength in micrometres", clean(key), i, v.field, *v.from)
			}
			if v.from != nil {
				*v.to = *v.from
			}
		}
		a.Bands = append(a.Bands, eo)
	}
	return a, nil
}

// objectMembers returns the names and values of a JSON object's members in
// the order written (Go maps would lose the item's order of assets).
func objectMembers(raw json.RawMessage) ([]string, []json.RawMessage, error) {
	dec := json.NewDecoder(bytes.NewReader(raw))
	if tok, err := dec.Token(); err != nil || tok != json.Delim('{') {
		return nil, nil, errors.New("is not an object")
	}
	var keys []string
	var values []json.RawMessage
	for dec.More() {
		tok, err := dec.Token()
		if err != nil {
			return nil, nil, errors.New("is not a valid object")
		}
		key, _ := tok.(string)
		if slices.Contains(keys, key) {
			return nil, nil, fmt.Errorf("names the asset %q twice", clean(key))
		}
		var v json.RawMessage
		if err := dec.Decode(&v); err != nil {
			return nil, nil, errors.New("is not a valid object")
		}
		keys, values = append(keys, key), append(values, v)
	}
	return keys, values, nil
}

// jsonProblem says what encoding/json found wrong, in words (no "json:"
// and no Go type names).
func jsonProblem(err error) string {
	var syn *json.SyntaxError
	var typ *json.UnmarshalTypeError
	switch {
	case errors.As(err, &syn) && strings.Contains(syn.Error(), "unexpected end"):
		return "the JSON ends early"
	case errors.As(err, &syn):
		return fmt.Sprintf("invalid JSON at byte %d: %s", syn.Offset, syn.Error())
	case errors.As(err, &typ):
		field := typ.Field
		if field == "" {
			field = "the document"
		}
		return fmt.Sprintf("%s must be %s, got a JSON %s", field, jsonKind(typ.Type), typ.Value)
	case errors.Is(err, io.ErrUnexpectedEOF):
		return "the JSON ends early"
	}
	return "invalid JSON"
}

func jsonKind(t reflect.Type) string {
	switch t.Kind() {
	case reflect.String:
		return "a string"
	case reflect.Float64:
		return "a number"
	case reflect.Slice:
		return "a list"
	}
	return "an object"
}

// pickAssets returns the assets named, in that order, or the item's data
// assets when none is named. A name is an asset key, else (any case) the
// eo:bands common_name or name of a one-band asset ("red", "nir08", "B4").
func (it *STACItem) pickAssets(names []string) ([]STACAsset, error) {
	if len(names) == 0 {
		return it.dataAssets()
	}
	var out []STACAsset
	for _, n := range names {
		a, err := it.findAsset(strings.TrimSpace(n))
		if err != nil {
			return nil, err
		}
		if slices.ContainsFunc(out, func(o STACAsset) bool { return o.Key == a.Key }) {
			return nil, specErr(ErrBadSpec, "%s: assets: %s picks the asset %s twice", it.Name(), n, clean(a.Key))
		}
		out = append(out, a)
	}
	return out, nil
}

// dataAssets are the assets with the role "data" (STAC best practice for
// an item's data files), in the item's order; an item whose assets carry
// no roles at all gives its GeoTIFF and JPEG 2000 assets.
func (it *STACItem) dataAssets() ([]STACAsset, error) {
	var out []STACAsset
	anyRoles := slices.ContainsFunc(it.Assets, func(a STACAsset) bool { return len(a.Roles) > 0 })
	for _, a := range it.Assets {
		media := strings.ToLower(a.Type)
		if slices.Contains(a.Roles, "data") || (!anyRoles && (strings.HasPrefix(media, "image/tiff") || strings.HasPrefix(media, "image/jp2"))) {
			out = append(out, a)
		}
	}
	if len(out) == 0 {
		return nil, specErr(ErrBandRange, "%s has no data asset (role \"data\"): pick its assets with --assets (its assets: %s)", it.Name(), it.assetList())
	}
	return out, nil
}

// findAsset finds one asset by key or band name.
func (it *STACItem) findAsset(name string) (STACAsset, error) {
	for _, fold := range []bool{false, true} {
		for _, a := range it.Assets {
			if a.Key == name || (fold && strings.EqualFold(a.Key, name)) {
				return a, nil
			}
		}
	}
	var found []STACAsset
	multi := ""
	for _, a := range it.Assets {
		for i, b := range a.Bands {
			if !strings.EqualFold(b.CommonName, name) && !strings.EqualFold(b.Name, name) {
				continue
			}
			if len(a.Bands) == 1 {
				found = append(found, a)
			} else {
				multi = fmt.Sprintf(" (the asset %s holds it as band %d of %d: pick that asset, and the band with --bands)", clean(a.Key), i+1, len(a.Bands))
			}
		}
	}
	switch len(found) {
	case 1:
		return found[0], nil
	case 0:
		return STACAsset{}, specErr(ErrBandRange, "%s: no asset %s, by key or eo:bands name%s (its assets: %s)", it.Name(), name, multi, it.assetList())
	}
	var keys []string
	for _, a := range found {
		keys = append(keys, clean(a.Key))
	}
	return STACAsset{}, specErr(ErrBandRange, "%s: %s names the bands of several assets (%s): pick one by its key", it.Name(), name, strings.Join(keys, ", "))
}

// assetList lists the assets for messages: "key (common name)".
func (it *STACItem) assetList() string {
	var out []string
	for _, a := range it.Assets {
		s := a.Key
		if len(a.Bands) == 1 && a.Bands[0].CommonName != "" && !strings.EqualFold(a.Bands[0].CommonName, a.Key) {
			s += " (" + a.Bands[0].CommonName + ")"
		}
		out = append(out, s)
	}
	return clean(strings.Join(out, ", "))
}

// isURL reports whether s is an http(s) URL.
func isURL(s string) bool {
	l := strings.ToLower(s)
	return strings.HasPrefix(l, "http://") || strings.HasPrefix(l, "https://")
}

// networkPrefixes are GDAL's virtual file systems that read over the
// network.
var networkPrefixes = []string{"/vsicurl", "/vsis3", "/vsigs", "/vsiaz", "/vsiadls", "/vsioss", "/vsiswift", "/vsiwebhdfs", "/vsihdfs"}

// isRemote reports whether an item at location was read over the network.
func isRemote(location string) bool {
	if isURL(location) {
		return true
	}
	return IsVirtual(location) && slices.ContainsFunc(networkPrefixes, func(p string) bool { return strings.Contains(location, p) })
}

// ResolveHref returns the GDAL path of an asset's href for an item read at
// location: http(s) URLs through /vsicurl/, file: URLs and paths as they
// are, relative references against the item's location (RFC 3986 for an
// item read over HTTP, its folder otherwise). For an item read over the
// network, hrefs that reach local files (absolute paths, file: URLs,
// relative paths climbing above the item's folder) are refused with
// ErrLocalHref.
func ResolveHref(location, href string) (string, error) {
	remote := isRemote(location)
	if isURL(href) {
		return "/vsicurl/" + href, nil
	}
	u, err := url.Parse(href)
	scheme := ""
	if err == nil {
		scheme = strings.ToLower(u.Scheme)
	}
	switch {
	case scheme == "file" && remote, isAbsolutePath(href) && remote:
		return "", ErrLocalHref
	case scheme == "file":
		return u.Path, nil
	case len(scheme) > 1:
		return "", fmt.Errorf("its scheme %s: is not supported (http, https, file, or a path)", scheme)
	case isAbsolutePath(href):
		return href, nil
	case err != nil && remote:
		return "", fmt.Errorf("it is not a valid URL reference")
	case err != nil:
		return joinPath(splitDir(location), href), nil
	}
	if remote {
		if climbs(u.Path) {
			return "", ErrLocalHref
		}
		return resolveRemote(location, u)
	}
	return joinPath(splitDir(location), u.Path), nil
}

// isAbsolutePath reports whether href is an absolute path: POSIX,
// Windows (drive or UNC) or a GDAL virtual path.
func isAbsolutePath(href string) bool {
	if strings.HasPrefix(href, "/") || strings.HasPrefix(href, `\`) {
		return true
	}
	return len(href) >= 3 && href[1] == ':' && (href[2] == '\\' || href[2] == '/') &&
		(href[0]|0x20 >= 'a' && href[0]|0x20 <= 'z')
}

// climbs reports whether a relative path leaves its folder.
func climbs(p string) bool {
	c := path.Clean(strings.ReplaceAll(p, `\`, "/"))
	return c == ".." || strings.HasPrefix(c, "../")
}

// splitDir is the folder of an item's location.
func splitDir(location string) string {
	dir, _ := splitPath(location)
	return dir
}

// resolveRemote resolves a relative reference against a remote location.
func resolveRemote(location string, ref *url.URL) (string, error) {
	base := strings.TrimPrefix(location, "/vsicurl/")
	if !isURL(base) {
		return joinPath(splitDir(location), ref.Path), nil // /vsis3/... and the like
	}
	b, err := url.Parse(base)
	if err != nil {
		return "", fmt.Errorf("the item's URL %s is not valid", base)
	}
	return "/vsicurl/" + b.ResolveReference(ref).String(), nil
}
