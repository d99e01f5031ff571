#!/usr/bin/env bash
# Installs the Debian packages bandfold needs to build and test, when missing:
# GDAL's headers and library, PROJ's (geodesic.h, which raster calls directly),
# GDAL's command-line tools (used by tests as an
# outside check), OpenBLAS and pkg-config. Uses sudo only when not root.
set -euo pipefail
need=()
for pkg in "$@"; do
	dpkg-query -W -f='${Status}' "$pkg" 2>/dev/null | grep -q "install ok installed" || need+=("$pkg")
done
[ ${#need[@]} -eq 0 ] && exit 0
if [ "$(id -u)" -eq 0 ]; then
	as_root=()
elif command -v sudo >/dev/null 2>&1 && sudo -n true 2>/dev/null; then
	as_root=(sudo)
else
	echo "bandfold: missing Debian packages: ${need[*]}; install them as root (apt-get install ${need[*]}) or run as a user with sudo" >&2
	exit 1
fi
echo "installing ${need[*]}" >&2
export DEBIAN_FRONTEND=noninteractive
"${as_root[@]}" apt-get update -qq
"${as_root[@]}" apt-get install -y -qq --no-install-recommends "${need[@]}" >/dev/null
