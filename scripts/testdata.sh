#!/usr/bin/env bash
# Fetches the real test data from Debian's packages into testdata/external/
# (git-ignored), checks it and caches it:
#   L7_ETMs.tif  Landsat 7 ETM+ 6-band subset, 349 x 352, UTM (public-domain
#                USGS imagery), shipped in r-cran-stars as tif/L7_ETMs.tif
#   iris.csv     Fisher's iris data, shipped in python3-sklearn as
#                sklearn/datasets/data/iris.csv
#   landsat/     real Landsat 7 ETM+ (2001-07-30) and Landsat 8 OLI/TIRS
#                (2013-07-07) Level-1 band files of one 41 x 41 window of
#                path 195 row 25, with their *_MTL.txt, shipped in
#                r-cran-satellite as extdata/; checked against
#                testdata/landsat-satellite.sha256
# No R or Python is needed: the packages are downloaded and unpacked only.
set -euo pipefail
dest=testdata/external
mkdir -p "$dest"
# unpack: downloads a Debian package (no install) and unpacks it into DIR/x.
unpack() { # package, dir
	local pkg=$1 tmp=$2
	chmod 755 "$tmp"
	if ! (cd "$tmp" && apt-get download "$pkg" >/dev/null 2>&1); then
		if [ "$(id -u)" -eq 0 ]; then apt-get update -qq; else sudo -n apt-get update -qq || true; fi
		(cd "$tmp" && apt-get download "$pkg" >/dev/null 2>&1) || { echo "testdata: cannot download Debian package $pkg" >&2; return 1; }
	fi
	dpkg -x "$tmp"/*.deb "$tmp/x"
}
fetch() { # package, path inside the package, file name, sha256
	local pkg=$1 inner=$2 name=$3 sum=$4
	if [ -f "$dest/$name" ] && echo "$sum  $dest/$name" | sha256sum -c --quiet - 2>/dev/null; then
		return 0
	fi
	local tmp
	tmp=$(mktemp -d)
	trap 'rm -rf "$tmp"' RETURN
	unpack "$pkg" "$tmp" || return 1
	local file
	file=$(find "$tmp/x" -path "*$inner" | head -n 1)
	[ -n "$file" ] || { echo "testdata: $inner not found in $pkg" >&2; return 1; }
	echo "$sum  $file" | sha256sum -c --quiet - || { echo "testdata: $name from $pkg has an unexpected checksum" >&2; return 1; }
	cp "$file" "$dest/$name.tmp" && mv "$dest/$name.tmp" "$dest/$name"
}
fetch r-cran-stars stars/tif/L7_ETMs.tif L7_ETMs.tif 3b722bf4470144b6691bf720bac08f47c99464acff4dd258252891c06312678e
fetch python3-sklearn sklearn/datasets/data/iris.csv iris.csv f13ffa8fdd56fd8e6c8d16d4081a3fbd3114bcd0aae4256c43205169cd9d1449
# fetch_dir: every file of a package folder listed in a checksum file.
fetch_dir() { # package, folder inside the package, destination, checksum file
	local pkg=$1 inner=$2 name=$3 sums=$4
	if [ -d "$dest/$name" ] && (cd "$dest/$name" && sha256sum -c --quiet "$OLDPWD/$sums") >/dev/null 2>&1; then
		return 0
	fi
	local tmp
	tmp=$(mktemp -d)
	trap 'rm -rf "$tmp"' RETURN
	unpack "$pkg" "$tmp" || return 1
	local dir
	dir=$(find "$tmp/x" -type d -path "*$inner" | head -n 1)
	[ -n "$dir" ] || { echo "testdata: $inner not found in $pkg" >&2; return 1; }
	(cd "$dir" && sha256sum -c --quiet "$OLDPWD/$sums") || { echo "testdata: files of $pkg differ from $sums" >&2; return 1; }
	rm -rf "$dest/$name.tmp" && mkdir -p "$dest/$name.tmp"
	awk '{print $2}' "$sums" | while read -r f; do cp "$dir/$f" "$dest/$name.tmp/"; done
	rm -rf "$dest/$name" && mv "$dest/$name.tmp" "$dest/$name"
}
fetch_dir r-cran-satellite satellite/extdata landsat testdata/landsat-satellite.sha256
# The product fixtures built from the Landsat files above (scripts/products.sh).
bash scripts/products.sh
