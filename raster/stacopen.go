package raster

import (
	"encoding/json"
	"fmt"
	"io"
	"math"
	"os"
	"path"
	"path/filepath"
	"slices"
	"strings"

	"github.com/airbusgeo/godal"

	"bandfold/raster/output"
)

// IsSTAC reports whether an IMAGE argument names a STAC item or
// ItemCollection: an http(s) URL (a raster over HTTP is given as
// /vsicurl/URL), or a path whose name ends in .json or .geojson, optionally
// followed by "#ID" to name one item of an ItemCollection.
func IsSTAC(arg string) bool {
	loc, _ := splitItemRef(arg)
	return isURL(loc) || isJSONName(loc)
}

func isJSONName(p string) bool {
	ext := strings.ToLower(path.Ext(p))
	return ext == ".json" || ext == ".geojson"
}

// splitItemRef splits "LOCATION#ID" (an item of an ItemCollection) into
// its location and id; id is "" when arg names no member. In a URL the
// fragment always names a member; in a path, only after a .json name.
func splitItemRef(arg string) (location, id string) {
	if isURL(arg) || strings.HasPrefix(arg, "/vsicurl/") {
		location, id, _ = strings.Cut(arg, "#")
		return location, id
	}
	if i := strings.LastIndexByte(arg, '#'); i > 0 && isJSONName(arg[:i]) {
		return arg[:i], arg[i+1:]
	}
	return arg, ""
}

// ItemFile is the local file an IMAGE argument reads when it is a member
// of an ItemCollection ("coll.json#ID" reads coll.json); any other argument
// is returned as it is.
func ItemFile(arg string) string {
	if loc, _ := splitItemRef(arg); IsSTAC(arg) && !isURL(loc) {
		return loc
	}
	return arg
}

// IsURL reports whether an IMAGE argument is an http(s) URL (of a STAC
// item), which has no local file to check.
func IsURL(arg string) bool { return isURL(arg) }

// readSTACText reads the JSON at an item's location: a local file, a GDAL
// virtual path, or an http(s) URL through GDAL's /vsicurl/ (so GDAL's HTTP
// options, proxies and credentials apply as they do to the rasters).
func readSTACText(loc string) ([]byte, error) {
	if !IsVirtual(loc) && !isURL(loc) {
		if err := output.CheckInput(loc, ErrNotFound); err != nil {
			return nil, err
		}
		return readSmallFile(loc, maxSTACSize)
	}
	p := loc
	if isURL(loc) {
		p = "/vsicurl/" + loc
	}
	f, err := godal.VSIOpen(p, errLogger)
	if err != nil {
		why := firstLine(err.Error())
		if why == "" || why == "unknown error" { // GDAL says nothing of a 404
			why = "missing, refused or unreachable"
		}
		return nil, fmt.Errorf("%s: cannot be read (%s)", loc, why)
	}
	defer f.Close()
	data, err := io.ReadAll(io.LimitReader(f, maxSTACSize+1))
	if err != nil {
		return nil, fmt.Errorf("%s: cannot be read (%s)", loc, firstLine(err.Error()))
	}
	if len(data) > maxSTACSize {
		return nil, fmt.Errorf("%s: larger than %d bytes, not a STAC item", loc, maxSTACSize)
	}
	return data, nil
}

// ReadSTACItem reads the item an IMAGE argument names: an Item's file or
// URL, or "LOCATION#ID" for an item of an ItemCollection. An
// ItemCollection of one item stands for that item.
func ReadSTACItem(arg string) (*STACItem, error) {
	loc, id := splitItemRef(arg)
	data, err := readSTACText(loc)
	if err != nil {
		return nil, err
	}
	items, collection, err := ParseSTAC(data, loc)
	if err != nil && isURL(loc) && !isJSONName(loc) {
		return nil, fmt.Errorf("%w (an http(s) URL is read as a STAC item; give a raster over HTTP as /vsicurl/URL)", err)
	} else if err != nil {
		return nil, err
	}
	var ids []string
	for _, it := range items {
		if id == "" && len(items) == 1 || it.ID == id {
			return it, nil
		}
		ids = append(ids, it.ID)
	}
	if id == "" {
		return nil, specErr(ErrBadSpec, "%s is an ItemCollection of %d items: give it where several images are taken (timeline, learn, fold --out-dir), or name one as %s#ID (its items: %s)",
			loc, len(items), loc, clean(strings.Join(ids, ", ")))
	}
	what := "an item"
	if collection {
		what = "an ItemCollection"
	}
	return nil, specErr(ErrBandRange, "%s is %s without an item %q (its items: %s)", loc, what, id, clean(strings.Join(ids, ", ")))
}

// ItemsOf returns the items an IMAGE argument stands for when it is an
// ItemCollection (a file or URL: "LOCATION#ID" for each item, in the
// collection's order) or a folder holding STAC item files (*.json,
// *.geojson; its ItemCollections give their items; other JSON is skipped),
// in the order of their names. ok is false for any other argument (an
// item, a raster, a stack, a Sentinel-2 product folder), which stands for
// itself.
func ItemsOf(arg string) (refs []string, ok bool, err error) {
	if fi, statErr := os.Stat(arg); statErr == nil && fi.IsDir() {
		if IsS2Product(arg) {
			return nil, false, nil
		}
		refs, err := folderItems(arg)
		return refs, len(refs) > 0, err
	}
	loc, id := splitItemRef(arg)
	if !IsSTAC(arg) || id != "" {
		return nil, false, nil
	}
	data, err := readSTACText(loc)
	if err != nil {
		return nil, false, err
	}
	items, collection, err := ParseSTAC(data, loc)
	if err != nil || !collection {
		return nil, false, err
	}
	for _, it := range items {
		refs = append(refs, it.Name())
	}
	return refs, true, nil
}

// folderItems lists the STAC items of the JSON files of a folder.
func folderItems(dir string) ([]string, error) {
	entries, err := os.ReadDir(dir)
	if err != nil {
		return nil, fmt.Errorf("folder %s: %w", dir, err)
	}
	var refs []string
	for _, e := range entries {
		if e.IsDir() || !isJSONName(e.Name()) {
			continue
		}
		p := filepath.Join(dir, e.Name())
		data, err := readSmallFile(p, maxSTACSize)
		if err != nil {
			return nil, err
		}
		var head struct {
			Type string `json:"type"`
		}
		if json.Unmarshal(data, &head) != nil || (head.Type != "Feature" && head.Type != "FeatureCollection") {
			continue // a catalog, a collection, an MTL in JSON ...
		}
		items, _, err := ParseSTAC(data, p)
		if err != nil {
			return nil, err
		}
		for _, it := range items {
			refs = append(refs, it.Name())
		}
	}
	return refs, nil
}

// itemStack is a STAC item being opened as a stack: its assets picked, in
// order, and their GDAL paths.
type itemStack struct {
	item   *STACItem
	assets []STACAsset
	paths  []string
}

// openItem reads the item paths name, picks its assets (SelectAssets) and
// checks that each one is a raster GDAL reads, on the first one's grid
// unless align: errors name the item and the asset.
func openItem(paths []string, o *openOptions) (*itemStack, error) {
	if len(paths) > 1 {
		return nil, specErr(ErrBadSpec, "%s: a STAC item is an image by itself: give items as separate images, not joined with commas", strings.Join(paths, ","))
	}
	it, err := ReadSTACItem(paths[0])
	if err != nil {
		return nil, err
	}
	assets, err := it.pickAssets(o.assets)
	if err != nil {
		return nil, err
	}
	st := &itemStack{item: it, assets: assets}
	for _, a := range assets {
		p, err := ResolveHref(it.Location, a.Href)
		if err != nil {
			return nil, fmt.Errorf("%s: asset %s: href %s: %w", it.Name(), clean(a.Key), clean(a.Href), err)
		}
		st.paths = append(st.paths, p)
	}
	return st, st.check(o.align != "")
}

// check opens every asset once: a broken href or an asset on another grid
// (without align) is refused naming the item and the asset.
func (st *itemStack) check(align bool) error {
	var first Grid
	for i, p := range st.paths {
		a := st.assets[i]
		where := fmt.Sprintf("%s: asset %s: href %s", st.item.Name(), clean(a.Key), clean(a.Href))
		if !IsVirtual(p) {
			if _, err := os.Stat(p); err != nil && p == a.Href {
				return fmt.Errorf("%s: no such file", where)
			} else if err != nil {
				return fmt.Errorf("%s: no such file (%s)", where, p)
			}
		}
		ds, err := openDataset(p)
		if err != nil {
			return fmt.Errorf("%s: %s", where, strings.TrimPrefix(err.Error(), p+": "))
		}
		g := gridOf(ds)
		ds.Close(errLogger)
		if i == 0 {
			first = g
		} else if err := first.Compare(g); err != nil && !align {
			return fmt.Errorf("%s: asset %s (%v) is not on the grid of asset %s (%v): %w; pass --align to warp it onto that grid",
				st.item.Name(), clean(a.Key), g, clean(st.assets[0].Key), first, err)
		}
	}
	return nil
}

// describe names the bands of the item's files by their asset keys
// ("red"; "visual:2" for band 2 of a multiband asset, or its eo:bands
// name) and gives them the wavelengths of the assets' eo:bands (centre and
// FWHM, micrometres to nanometres) and the platform's band name. counts
// are the bands per file, fileOf the file of each band.
func (st *itemStack) describe(s *Stack, all []Band, counts, fileOf []int) {
	s.parts, s.labelCommon = map[string]string{}, st.item.ID
	for i := range all {
		b := &all[i]
		a := st.assets[fileOf[i]]
		s.parts[b.Path] = a.Key
		b.Name = a.Key
		var eo EOBand
		if len(a.Bands) == counts[fileOf[i]] {
			eo = a.Bands[b.Index-1]
		}
		if counts[fileOf[i]] > 1 {
			b.Name = fmt.Sprintf("%s:%s", a.Key, firstNonEmpty(eo.CommonName, eo.Name, fmt.Sprint(b.Index)))
		}
		if eo.CentreUM > 0 {
			b.WavelengthNM, b.FWHMNM = micrometresToNM(eo.CentreUM), micrometresToNM(eo.FWHMUM)
		}
		if eo.Name != "" {
			b.Product = strings.TrimSpace(st.item.Platform + " band " + eo.Name)
		}
	}
	if !isRemote(st.item.Location) {
		s.addSideFile(st.item.Location)
	}
}

// micrometresToNM converts a wavelength, rounded to a thousandth of a
// nanometre so that 0.4825 um is 482.5 nm and not 482.49999999999994.
func micrometresToNM(um float64) float64 { return math.Round(um*1e6) / 1e3 }

// itemDate dates the item arg names by its properties.datetime; an item
// without one (null, as the spec allows with start_datetime and
// end_datetime) or with one that is not a date gives an error wrapping
// ErrNoDate.
func itemDate(arg string) (Date, error) {
	it, err := ReadSTACItem(arg)
	if err != nil {
		return Date{}, err
	}
	if it.Datetime == "" {
		span := ""
		if it.Start != "" || it.End != "" {
			span = fmt.Sprintf(" (it spans %s to %s)", clean(it.Start), clean(it.End))
		}
		return Date{}, fmt.Errorf("%s: %w: its properties.datetime is null%s", it.Name(), ErrNoDate, span)
	}
	d, ok := ParseDate(it.Datetime)
	if !ok {
		return Date{}, fmt.Errorf("%s: %w: its properties.datetime %q is not an RFC 3339 date-time", it.Name(), ErrNoDate, clean(it.Datetime))
	}
	d.Source = STACDateSource
	return d, nil
}

// STACDateSource is the Date.Source of a date from a STAC item.
const STACDateSource = "STAC:datetime"

// stacOnly reports whether o's asset selection is given for paths that
// hold no STAC item.
func stacOnly(paths []string, o *openOptions) error {
	if len(o.assets) == 0 || slices.ContainsFunc(paths, IsSTAC) {
		return nil
	}
	return specErr(ErrBadSpec, "%s is not a STAC item: --assets picks the assets of items", strings.Join(paths, ","))
}
