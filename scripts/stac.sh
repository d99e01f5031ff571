#!/usr/bin/env bash
# Builds STAC fixtures for the real Landsat band files of
# testdata/external/landsat/ (run by scripts/products.sh) into
# testdata/external/stac/, laid out as a static catalogue keeps items:
#   <ID>/<ID>.json      a STAC Item (STAC 1.0.0 Item Specification, with the
#       eo v1.0.0, projection v1.0.0 and raster v1.1.0 extensions) for each
#       of the two Level-1 scenes, beside hard links to (or copies of) the
#       scene's band files and MTL, its asset hrefs relative to the item
#   landsat-items.json  an ItemCollection (STAC API ItemCollection: a GeoJSON
#       FeatureCollection) of the same two items, its hrefs relative to it
# Item fields come from the files and their MTLs: the geometry and bbox from
# gdalinfo's WGS 84 extent, proj:* and raster:bands from gdalinfo,
# properties.datetime from DATE_ACQUIRED and SCENE_CENTER_TIME,
# eo:cloud_cover from CLOUD_COVER; eo:bands give the handbooks' nominal band
# edges (centre and width in micrometres, the same table as raster/landsat.go)
# and the common names of the eo extension's table. Asset keys are the
# common names, as USGS's own Landsat items name them. Nothing is downloaded.
set -euo pipefail
src=testdata/external/landsat
dest=testdata/external/stac
stamp=$dest/.built-v1
[ -f "$stamp" ] && exit 0
rm -rf "$dest.tmp" && mkdir -p "$dest.tmp"
for id in LE07_L1TP_195025_20010730_20170204_01_T1 LC08_L1TP_195025_20130707_20170503_01_T1; do
	mkdir -p "$dest.tmp/$id"
	for f in "$src/${id}"_*; do
		case $f in *.aux.xml) continue ;; esac
		ln -f "$f" "$dest.tmp/$id/" 2>/dev/null || cp "$f" "$dest.tmp/$id/"
	done
done
python3 - "$dest.tmp" <<'PY'
import json, os, re, subprocess, sys

out = sys.argv[1]

def mtl(path, key):
    m = re.search(r'^\s*%s = "?([^"\n]*)"?\s*$' % key, open(path).read(), re.M)
    return m.group(1)

# asset key (eo common name), file band, centre and width in micrometres
# (nominal edges: USGS Landsat 7 and Landsat 8 Data Users Handbooks), title.
SENSORS = {
    "LE07": ("landsat-7", ["etm"], [
        ("blue", "B1", 0.450, 0.515), ("green", "B2", 0.525, 0.605), ("red", "B3", 0.630, 0.690),
        ("nir08", "B4", 0.775, 0.900), ("swir16", "B5", 1.550, 1.750), ("swir22", "B7", 2.080, 2.350),
        ("pan", "B8", 0.520, 0.900), ("lwir-low-gain", "B6_VCID_1", 10.40, 12.50), ("lwir-high-gain", "B6_VCID_2", 10.40, 12.50)]),
    "LC08": ("landsat-8", ["oli", "tirs"], [
        ("coastal", "B1", 0.435, 0.451), ("blue", "B2", 0.452, 0.512), ("green", "B3", 0.533, 0.590),
        ("red", "B4", 0.636, 0.673), ("nir08", "B5", 0.851, 0.879), ("swir16", "B6", 1.566, 1.651),
        ("swir22", "B7", 2.107, 2.294), ("pan", "B8", 0.503, 0.676), ("cirrus", "B9", 1.363, 1.384),
        ("lwir11", "B10", 10.60, 11.19), ("lwir12", "B11", 11.50, 12.51)]),
}

def gdalinfo(path):
    return json.loads(subprocess.run(["gdalinfo", "-json", path], check=True, capture_output=True, text=True).stdout)

def raster_asset(folder, file, title, roles):
    info = gdalinfo(os.path.join(out, folder, file))
    gt, band = info["geoTransform"], info["bands"][0]
    rb = {"data_type": band["type"].lower(), "spatial_resolution": gt[1]}
    if "noDataValue" in band:
        rb["nodata"] = band["noDataValue"]
    return info, {
        "href": f"./{file}", "type": "image/tiff; application=geotiff", "title": title, "roles": roles,
        "proj:shape": [info["size"][1], info["size"][0]],
        # The projection extension's proj:transform is the affine
        # [a, b, c, d, e, f] of x = a*col + b*row + c, y = d*col + e*row + f.
        "proj:transform": [gt[1], gt[2], gt[0], gt[4], gt[5], gt[3]],
        "raster:bands": [rb],
    }

def item(id):
    platform, instruments, bands = SENSORS[id[:4]]
    mtlname = f"{id}_MTL.txt"
    mtlpath = os.path.join(out, id, mtlname)
    assets, info = {}, None
    for key, b, lo, hi in bands:
        common = "lwir" if key.startswith("lwir-") else key
        i, a = raster_asset(id, f"{id}_{b}.TIF", f"Band {b[1:]} ({common})", ["data"])
        info = info or i
        a["eo:bands"] = [{"name": b.split("_")[0], "common_name": common,
                          "center_wavelength": round((lo + hi) / 2, 4), "full_width_half_max": round(hi - lo, 4)}]
        assets[key] = a
    _, assets["qa"] = raster_asset(id, f"{id}_BQA.TIF", "Quality band (BQA)", ["qa", "metadata"])
    assets["mtl"] = {"href": f"./{mtlname}", "type": "text/plain", "title": "Product metadata (MTL)", "roles": ["metadata"]}
    ring = info["wgs84Extent"]["coordinates"][0]
    lons, lats = [p[0] for p in ring], [p[1] for p in ring]
    return {
        "type": "Feature",
        "stac_version": "1.0.0",
        "stac_extensions": [
            "https://stac-extensions.github.io/eo/v1.0.0/schema.json",
            "https://stac-extensions.github.io/projection/v1.0.0/schema.json",
            "https://stac-extensions.github.io/raster/v1.1.0/schema.json",
        ],
        "id": id,
        "geometry": info["wgs84Extent"],
        "bbox": [min(lons), min(lats), max(lons), max(lats)],
        "properties": {
            "datetime": f"{mtl(mtlpath, 'DATE_ACQUIRED')}T{mtl(mtlpath, 'SCENE_CENTER_TIME')[:15]}Z",
            "platform": platform,
            "instruments": instruments,
            "eo:cloud_cover": float(mtl(mtlpath, "CLOUD_COVER")),
            "proj:epsg": info["stac"]["proj:epsg"],
        },
        "links": [],
        "assets": assets,
    }

def in_folder(it):
    """The item with its hrefs relative to the folder above its own."""
    it = json.loads(json.dumps(it))
    for a in it["assets"].values():
        a["href"] = a["href"].replace("./", "./" + it["id"] + "/", 1)
    return it

items = []
for id in sorted(d for d in os.listdir(out) if os.path.isdir(os.path.join(out, d))):
    it = item(id)
    items.append(in_folder(it))
    with open(os.path.join(out, id, id + ".json"), "w") as f:
        json.dump(it, f, indent=2)
        f.write("\n")
with open(os.path.join(out, "landsat-items.json"), "w") as f:
    json.dump({"type": "FeatureCollection", "features": items, "links": []}, f, indent=2)
    f.write("\n")
PY
touch "$dest.tmp/.built-v1"
rm -rf "$dest" && mv "$dest.tmp" "$dest"
