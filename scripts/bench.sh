#!/usr/bin/env bash
# make bench: speed and memory of learn, fold, change and batch fold on
# synthetic cubes, side by side with the in-memory approach users write
# (numpy) and with GDAL alone, when Debian's python3-numpy and python3-gdal
# are present. Figures go to stdout and bench-out/results.txt.
set -euo pipefail
B=${BANDFOLD:-./bin/bandfold}
OUT=${BENCH_DIR:-bench-out}
PY=/usr/bin/python3
mkdir -p "$OUT"
RES="$OUT/results.txt"
: >"$RES"
say() { echo "$*" | tee -a "$RES"; }

# measure LABEL CMD...: wall seconds and peak resident MiB via /usr/bin/time -v.
measure() {
	local label=$1
	shift
	local log
	log=$(mktemp)
	/usr/bin/time -v "$@" >/dev/null 2>"$log" || { cat "$log" >&2; rm -f "$log"; return 1; }
	local wall rss
	wall=$(awk -F': ' '/Elapsed \(wall clock\)/ {n=split($2,a,":"); s=0; for(i=1;i<=n;i++) s=s*60+a[i]; print s}' "$log")
	rss=$(awk -F': ' '/Maximum resident set size/ {printf "%.0f", $2/1024}' "$log")
	rm -f "$log"
	printf '%-44s %8.2f s %8s MiB\n' "$label" "$wall" "$rss" | tee -a "$RES" >&2
	echo "$wall $rss"
}
ratio() { awk -v a="$1" -v b="$2" 'BEGIN { printf "%.2f", a / b }'; }

[ -x /usr/bin/time ] || bash scripts/deps.sh time
have_py=0
if $PY -c 'import numpy, osgeo.gdal' 2>/dev/null; then have_py=1; else
	bash scripts/deps.sh python3-numpy python3-gdal && $PY -c 'import numpy, osgeo.gdal' 2>/dev/null && have_py=1 || true
fi

cube=$OUT/cube224.tif
scene=$OUT/scene7.tif
scene2=$OUT/scene7b.tif
[ -f "$cube" ] || $B demo synth --bands 224 --width 1024 --height 1024 --type int16 --out "$cube" --quiet
[ -f "$scene" ] || $B demo synth --bands 7 --width 8192 --height 8192 --type uint16 --block 512 --out "$scene" --quiet
[ -f "$scene2" ] || $B demo synth --bands 7 --width 8192 --height 8192 --type uint16 --block 512 --seed 2 --out "$scene2" --quiet
cat "$cube" "$scene" "$scene2" >/dev/null # warm the page cache for every contender alike

say "== learn (target: <= 0.35x numpy on the 224-band cube, <= 0.25x on the 7-band scene; peak <= 256 MiB)"
for f in "$cube" "$scene"; do
	read -r t rss < <(measure "bandfold learn $(basename "$f")" $B learn "$f" --out "$OUT/basis-$(basename "$f" .tif).json" --overwrite --quiet)
	if [ $have_py = 1 ]; then
		read -r tn rssn < <(measure "numpy cov+eigh $(basename "$f")" $PY - "$f" <<'PYEOF'
import sys
import numpy as np
from osgeo import gdal
ds = gdal.Open(sys.argv[1])
x = ds.ReadAsArray().reshape(ds.RasterCount, -1).astype(np.float64)
c = np.cov(x)
w, v = np.linalg.eigh(c)
PYEOF
)
		say "   ratio bandfold/numpy: time $(ratio "$t" "$tn"), memory $(ratio "$rss" "$rssn")"
	fi
done

say "== fold (target: <= 1.5x GDAL alone reading the input and writing an output of the same size; peak <= 256 MiB)"
for spec in "$cube 10 cube224" "$scene 3 scene7"; do
	set -- $spec
	read -r t rss < <(measure "bandfold fold $3 k=$2" $B fold "$1" --basis "$OUT/basis-$3.json" -k "$2" --out "$OUT/$3.components.tif" --overwrite --quiet)
	if [ $have_py = 1 ]; then
		# GDAL alone: read every band of the input tile by tile and write k
		# float32 bands with bandfold's creation options. The values written
		# are the input's first k bands times an irrational factor, so that
		# they are real-valued like component scores: DEFLATE's speed depends
		# on the content, and integral floats compress far faster.
		read -r tg rssg < <(measure "GDAL read all + write $2 bands $3" $PY - "$1" "$2" "$OUT/$3.gdal.tif" <<'PYEOF'
import sys
from osgeo import gdal
gdal.UseExceptions()
src = gdal.Open(sys.argv[1]); k = int(sys.argv[2])
opts = ["TILED=YES", "BLOCKXSIZE=256", "BLOCKYSIZE=256", "COMPRESS=DEFLATE", "PREDICTOR=3", "ZLEVEL=1", "BIGTIFF=IF_SAFER", "NUM_THREADS=ALL_CPUS"]
dst = gdal.GetDriverByName("GTiff").Create(sys.argv[3], src.RasterXSize, src.RasterYSize, k, gdal.GDT_Float32, opts)
step = 256
for y in range(0, src.RasterYSize, step):
    h = min(step, src.RasterYSize - y)
    a = src.ReadAsArray(0, y, src.RasterXSize, h).astype("float32") * 0.70710678 + 0.318
    for b in range(k):
        dst.GetRasterBand(b + 1).WriteArray(a[b], 0, y)
dst = None
PYEOF
)
		say "   ratio bandfold/GDAL: time $(ratio "$t" "$tg")"
	fi
done

say "== change on two 7-band 8192 x 8192 scenes (target: <= 6x one learn over both scenes; peak <= 512 MiB)"
read -r tl _ < <(measure "bandfold learn both scenes" $B learn "$scene" "$scene2" --out "$OUT/basis-pair.json" --overwrite --quiet)
read -r tc rssc < <(measure "bandfold change" $B change "$scene" "$scene2" --out "$OUT/change" --overwrite --quiet)
say "   ratio change/learn: time $(ratio "$tc" "$tl")"

say "== fold to an error budget, 224-band cube (target: <= 0.6x the bytes of --type int16 at the basis's k, at no higher RMSE; <= 1.3x its time)"
bc=$OUT/basis-cube224.json
read -r t16 _ < <(measure "bandfold fold int16 (99% variance k)" $B fold "$cube" --basis "$bc" --type int16 --out "$OUT/cube224.int16.tif" --overwrite --quiet)
rmse=$($B unfold "$OUT/cube224.int16.tif" --basis "$bc" --out "$OUT/cube224.restored.tif" --compare "$cube" --overwrite --quiet --json | $PY -c 'import json,sys; print(json.load(sys.stdin)["rmse"])')
read -r tb _ < <(measure "bandfold fold --max-rmse $rmse" $B fold "$cube" --basis "$bc" --max-rmse "$rmse" --out "$OUT/cube224.budget.tif" --overwrite --quiet)
b16=$(stat -c %s "$OUT/cube224.int16.tif") bb=$(stat -c %s "$OUT/cube224.budget.tif")
achieved=$($B fold "$cube" --basis "$bc" --max-rmse "$rmse" --out "$OUT/cube224.budget.tif" --overwrite --quiet --json | $PY -c 'import json,sys; d=json.load(sys.stdin); print(d["achieved_rmse"], d["components"], d["type"])')
say "   int16: $b16 bytes, rmse $rmse; budget: $bb bytes, achieved rmse, k, type: $achieved"
say "   ratio budget/int16: bytes $(ratio "$bb" "$b16"), time $(ratio "$tb" "$t16")"

say "== batch fold: 20 demo-sized scenes (2048 x 2048 x 8)"
mkdir -p "$OUT/batch/in"
for i in $(seq 1 20); do
	f=$OUT/batch/in/scene$i.tif
	[ -f "$f" ] || $B demo synth --bands 8 --width 2048 --height 2048 --type uint16 --seed "$i" --out "$f" --quiet
done
$B learn "$OUT/batch/in/scene1.tif" --out "$OUT/batch/basis.json" --overwrite --quiet
rm -rf "$OUT/batch/one" "$OUT/batch/all" && mkdir -p "$OUT/batch/one" "$OUT/batch/all"
read -r t1 _ < <(measure "20 scenes one by one" bash -c "for f in $OUT/batch/in/*.tif; do $B fold \$f --basis $OUT/batch/basis.json --out $OUT/batch/one/\$(basename \$f .tif).c.tif --quiet || exit 1; done")
read -r tb _ < <(measure "20 scenes in one batch" $B fold "$OUT/batch/in/*.tif" --basis "$OUT/batch/basis.json" --out-dir "$OUT/batch/all" --quiet)
say "   scenes per minute: one by one $(awk -v t="$t1" 'BEGIN{printf "%.1f", 20*60/t}'), batch $(awk -v t="$tb" 'BEGIN{printf "%.1f", 20*60/t}')"
# -- learn --method mnf against --method pca (issue 14) --
say "== learn --method mnf vs pca on the 224-band cube (target: mnf <= 1.5x pca; peak <= 256 MiB)"
read -r tp _ < <(measure "bandfold learn --method pca cube224" $B learn "$cube" --method pca --out "$OUT/basis-pca.json" --overwrite --quiet)
read -r tm rssm < <(measure "bandfold learn --method mnf cube224" $B learn "$cube" --method mnf --out "$OUT/basis-mnf.json" --overwrite --quiet)
say "   ratio mnf/pca: time $(ratio "$tm" "$tp"), peak $rssm MiB"
# -- end mnf vs pca --

say "results in $RES"
