#!/usr/bin/env bash
# make bench: speed and memory of bandfold's jobs on synthetic cubes, side by
# side with what they are measured against: the in-memory approach users
# write (numpy), GDAL alone, the physical floors of this machine (GDAL reading
# the blocks with direct I/O; OpenBLAS dsyrk for the same bands and pixels;
# bandfold's integer co-moment kernel alone on the same pixels; what change
# cannot avoid), and the commands a job replaces.
#
#   bash scripts/bench.sh          the cubes of the targets (about 15 minutes)
#   bash scripts/bench.sh large    make bench-large: learn on a 7.5 GB cube, and
#                                  change over a 21,960 x 21,960 region in stages
#
# Each bandfold figure is the fastest of BENCH_REPEAT runs (default 3) with
# its peak resident memory; figures go to stdout and bench-out/results.txt.
# Needs Debian's python3-numpy, python3-gdal and python3-threadpoolctl
# (installed when missing), and Go for the kernel's figure. The machine
# should be otherwise idle: every ratio is to a floor measured in the same
# run, but a busy neighbour moves both sides unequally.
set -euo pipefail
B=${BANDFOLD:-./bin/bandfold}
GO=${GO:-go}
OUT=${BENCH_DIR:-bench-out}
REPEAT=${BENCH_REPEAT:-3}
PY=/usr/bin/python3
REF=scripts/bench_reference.py
mkdir -p "$OUT"
RES="$OUT/results${1:+-$1}.txt"
: >"$RES"
say() { echo "$*" | tee -a "$RES"; }

[ -x /usr/bin/time ] || bash scripts/deps.sh time
$GO test -c -o "$OUT/raster.test" ./raster # BenchmarkCubeKernel, for intkernel
$PY -c 'import numpy, osgeo.gdal, threadpoolctl' 2>/dev/null || bash scripts/deps.sh python3-numpy python3-gdal python3-threadpoolctl

# once LABEL CMD...: one run; prints "wall rss" (seconds, MiB) from /usr/bin/time -v.
once() {
	local log
	log=$(mktemp)
	/usr/bin/time -v "$@" >/dev/null 2>"$log" || { cat "$log" >&2; rm -f "$log"; return 1; }
	awk -F': ' '/Elapsed \(wall clock\)/ {n=split($2,a,":"); s=0; for(i=1;i<=n;i++) s=s*60+a[i]; w=s}
		/Maximum resident set size/ {r=$2/1024} END {printf "%.2f %.0f\n", w, r}' "$log"
	rm -f "$log"
}
# measure LABEL CMD...: the fastest of REPEAT runs and the largest peak;
# prints "wall rss" on stdout and a line for the results on stderr.
measure() {
	local label=$1 best="" peak=0 w r i
	shift
	for i in $(seq "$REPEAT"); do
		read -r w r < <(once "$@")
		[ -n "$w" ] || return 1
		if [ -z "$best" ] || awk -v a="$w" -v b="$best" 'BEGIN{exit !(a<b)}'; then best=$w; fi
		[ "$r" -gt "$peak" ] && peak=$r
	done
	printf '%-52s %8.2f s %8s MiB\n' "$label" "$best" "$peak" | tee -a "$RES" >&2
	echo "$best $peak"
}
# floor WHAT ARGS...: the fastest of REPEAT runs of bench_reference.py; prints seconds.
floor() {
	local best="" line t i
	for i in $(seq "$REPEAT"); do
		line=$(OPENBLAS_CORETYPE=$kernel $PY $REF "$@")
		t=${line%% *}
		if [ -z "$best" ] || awk -v a="$t" -v b="$best" 'BEGIN{exit !(a<b)}'; then best=$t; fi
	done
	printf '%-52s %8.2f s   (%s)\n' "floor: $1 $(basename "${2:-}") ${3:-}" "$best" "${line#* }" | tee -a "$RES" >&2
	echo "$best"
}
# intkernel FILE: the integer co-moment kernel alone over every pixel of
# FILE (bands.AddInt16Tile on 2 goroutines, the tiles read beforehand:
# BenchmarkCubeKernel in raster), the fastest of REPEAT passes; prints
# seconds.
intkernel() {
	local t
	t=$(BANDFOLD_BENCH_CUBE=$1 "$OUT/raster.test" -test.run XXX -test.bench CubeKernel -test.benchtime "${REPEAT}x" |
		awk '/kernel-s/ { for (i = 1; i < NF; i++) if ($(i + 1) == "kernel-s") print $i }')
	printf '%-52s %8.2f s   (integer kernel, 2 goroutines, reads excluded)\n' "floor: kernel $(basename "$1")" "$t" | tee -a "$RES" >&2
	echo "$t"
}
# profile LABEL CMD...: one more run of a job measured above, with a CPU
# profile (BANDFOLD_CPUPROFILE), so that what bounds it is measured in the
# same run as its floors. Prints its wall time, the CPU time the process
# spent (user + system, /usr/bin/time) and that time spread over every
# core: no schedule of the same work can finish sooner. Then the functions
# taking the most CPU (go tool pprof -top, flat; a call into C counted
# under the C function, not under runtime.cgocall); the whole profile stays
# in bench-out/LABEL.prof (go tool pprof bin/bandfold bench-out/LABEL.prof).
profile() {
	local label=$1 log prof w c
	shift
	log=$(mktemp)
	prof=$OUT/$label.prof
	BANDFOLD_CPUPROFILE=$prof /usr/bin/time -v "$@" >/dev/null 2>"$log" || { cat "$log" >&2; rm -f "$log"; return 1; }
	read -r w c < <(awk -F': ' '/Elapsed \(wall clock\)/ {n=split($2,a,":"); s=0; for(i=1;i<=n;i++) s=s*60+a[i]; w=s}
		/User time/ {u=$2} /System time/ {y=$2} END {printf "%.2f %.2f\n", w, u+y}' "$log")
	rm -f "$log"
	say "   profile of $label (one more run, profiled): wall $w s, CPU $c s (user + system) = $(ratio "$c" "$(nproc)") s over $(nproc) cores; most CPU:" >&2
	$GO tool pprof -top -nodecount=10 -hide '^runtime\.cgocall$' "$B" "$prof" 2>/dev/null |
		awk '/^ *flat/ {on=1; next} on && NF >= 6 { name=$6; for (i = 7; i <= NF; i++) name = name " " $i; printf "      %7s %6s  %s\n", $1, $2, name }' | tee -a "$RES" >&2
	echo "$w $c"
}
ratio() { awk -v a="$1" -v b="$2" 'BEGIN { printf "%.2f", a / b }'; }
maxof() { awk -v a="$1" -v b="$2" 'BEGIN { print (a > b) ? a : b }'; }
# staged_once DIR N LINES BEFORE AFTER [OPTIONS...]: every stage of a change
# in N shards into DIR, one after another (scan x N, fit, map x N, finish);
# writes a line per stage (wall, peak) into the file LINES and prints
# "total-wall map-peak all-peak".
staged_once() {
	local dir=$1 n=$2 lines=$3 total=0 mapmax=0 allmax=0 w r st i shard
	shift 3
	rm -rf "$dir" "$dir.stages"
	: >"$lines"
	for st in scan fit map finish; do
		for i in $(seq 0 $((n - 1))); do
			shard=(--shard "$i/$n")
			[ "$st" = scan ] || [ "$st" = map ] || { shard=(); [ "$i" = 0 ] || break; }
			read -r w r < <(once $B change "$@" --out "$dir" --stage "$st" "${shard[@]}" --quiet)
			[ -n "$w" ] || return 1
			printf '   %-49s %8.2f s %8s MiB\n' "--stage $st ${shard[*]}" "$w" "$r" >>"$lines"
			total=$(awk -v a="$total" -v b="$w" 'BEGIN { print a + b }')
			[ "$st" = map ] && [ "$r" -gt "$mapmax" ] && mapmax=$r
			[ "$r" -gt "$allmax" ] && allmax=$r
		done
	done
	echo "$total $mapmax $allmax"
}
# staged LABEL DIR N BEFORE AFTER [OPTIONS...]: the fastest of REPEAT
# staged runs (staged_once) and the largest peaks; prints its stages and
# the total, and "total-wall map-peak all-peak" on stdout.
staged() {
	local label=$1 dir=$2 n=$3 best="" mapmax=0 allmax=0 t m a i lines
	shift 3
	lines=$(mktemp)
	for i in $(seq "$REPEAT"); do
		read -r t m a < <(staged_once "$dir" "$n" "$lines.run" "$@")
		[ -n "$t" ] || { rm -f "$lines" "$lines.run"; return 1; }
		if [ -z "$best" ] || awk -v a="$t" -v b="$best" 'BEGIN{exit !(a<b)}'; then best=$t; mv "$lines.run" "$lines"; fi
		[ "$m" -gt "$mapmax" ] && mapmax=$m
		[ "$a" -gt "$allmax" ] && allmax=$a
	done
	tee -a "$RES" <"$lines" >&2
	printf '%-52s %8.2f s %8s MiB\n' "$label (all stages)" "$best" "$allmax" | tee -a "$RES" >&2
	rm -f "$lines" "$lines.run"
	echo "$best $mapmax $allmax"
}
# The in-memory baseline runs with the OpenBLAS settings that older releases
# needed on some processors removed from its environment alone.
numpy=(env -u OPENBLAS_CORETYPE -u OPENBLAS_L2_SIZE)

# The kernels: bandfold starts OpenBLAS on the CPU's own kernel where the
# library does not recognise the processor (see bands/openblas); numpy runs
# whatever the library detects. Both are printed, and the floors use
# bandfold's kernel: they are what the arithmetic can reach here.
kernel=$($B --version | sed -n 's/.*OpenBLAS kernel \([^)]*\)).*/\1/p')
say "== machine: $(nproc) cores, $(awk '/MemTotal/ {printf "%.0f GiB", $2/2^20}' /proc/meminfo); $($B --version)"
numpy_line=$("${numpy[@]}" $PY $REF kernel | cut -d' ' -f2-)
numpy_kernel=$(echo "$numpy_line" | sed -n 's/.*kernel \([^,]*\),.*/\1/p')
say "   numpy (OPENBLAS_CORETYPE, OPENBLAS_L2_SIZE unset): $numpy_line"

# fixed_cost: the time of a learn on a 64 x 64 image, what every run pays
# whatever its input (starting the process: loading GDAL's libraries and
# registering its drivers; writing the basis), which the floors, timed
# inside one Python process, do not; sets fixed.
fixed_cost() {
	local tiny=$OUT/tiny64.tif
	[ -f "$tiny" ] || $B demo synth --bands 7 --width 64 --height 64 --type uint16 --out "$tiny" --quiet
	read -r fixed _ < <(measure "bandfold learn 64 x 64 (a run's fixed cost)" $B learn "$tiny" --out "$OUT/basis-tiny64.json" --overwrite --quiet)
}

# learn_vs LABEL FILE BANDS PIXELS: learn against numpy and the floors.
learn_vs() {
	local label=$1 f=$2 p=$3 n=$4 t rss tn rssn tr tr2 ts ti tk fl c
	read -r t rss < <(measure "bandfold learn $label" $B learn "$f" --out "$OUT/basis-$label.json" --overwrite --quiet)
	tr=$(floor read "$f")
	tr2=$(floor read2 "$f")
	ts=$(floor syrk "$p" "$n")
	ti=$(intkernel "$f")
	fl=$(maxof "$tr" "$ti")
	if [ "$label" != large ]; then
		read -r tn rssn < <(REPEAT=1 measure "numpy cov + eigh $label" "${numpy[@]}" $PY $REF numpy-learn "$f")
		say "   ratio bandfold/numpy: time $(ratio "$t" "$tn"), memory $(ratio "$rss" "$rssn")"
		if [ -n "$kernel" ] && [ "$kernel" != "$numpy_kernel" ]; then
			# The same comparison with numpy on bandfold's kernel, so that the
			# ratio above is not read as an algorithm's gain alone.
			read -r tk _ < <(REPEAT=1 measure "numpy cov + eigh $label, $kernel kernel" env OPENBLAS_CORETYPE="$kernel" $PY $REF numpy-learn "$f")
			say "   ratio bandfold/numpy on the $kernel kernel: time $(ratio "$t" "$tk")"
		fi
	fi
	say "   ratio bandfold/floor (the slower of read $tr s and the integer kernel $ti s): $(ratio "$t" "$fl"); bandfold/read $(ratio "$t" "$tr"), bandfold/kernel $(ratio "$t" "$ti"), bandfold/dsyrk $(ratio "$t" "$ts"); kernel/dsyrk $(ratio "$ti" "$ts")"
	[ -z "${fixed:-}" ] || say "   less a run's fixed cost ($fixed s), bandfold/floor: $(ratio "$(awk -v a="$t" -v b="$fixed" 'BEGIN { print a - b }')" "$fl")"
	# Reading on both cores is barely faster than on one: the reads take
	# both cores for most of the floor, so the kernel's work comes after
	# them rather than beside them.
	local work
	work=$(awk -v a="$tr2" -v b="$ti" -v c="${fixed:-0}" 'BEGIN { print a + b + c }')
	say "   reading on both cores $tr2 s (one: $tr s), then the kernel on both ($ti s) and a run's fixed cost (${fixed:-0} s): $work s = $(ratio "$work" "$tr") of the read floor; bandfold/that $(ratio "$t" "$work")"
	read -r _ c < <(profile "learn-$label" $B learn "$f" --out "$OUT/basis-$label.json" --overwrite --quiet)
	say "   the run's CPU over $(nproc) cores against the read floor: $(ratio "$(ratio "$c" "$(nproc)")" "$tr") (no schedule of this work beats this ratio)"
	[ "$p" -ge 32 ] || say "   (for $p bands numpy's dsyrk is no tight floor: the products are memory-bound, and reading is the floor that counts)"
}

if [ "${1:-}" = large ]; then
	cube=$OUT/cube224-4096.tif
	[ -f "$cube" ] || $B demo synth --bands 224 --width 4096 --height 4096 --type int16 --out "$cube" --quiet
	say "== learn on a cube larger than memory allows in-memory: 224 bands x 4096 x 4096 Int16, $(du -h "$cube" | cut -f1) (target: <= 1.3x the floor, peak <= 256 MiB)"
	awk 'BEGIN { n = 4096 * 4096; p = 224; printf "   the in-memory approach would need %.0f GiB for one float64 copy of the pixels (p x n x 8 bytes) and %.0f GiB with numpy.cov'"'"'s centred copy: not run\n", p*n*8/2^30, 2*p*n*8/2^30 }' | tee -a "$RES"
	# Warm the page cache as for the other cubes (the cube fits in this
	# machine's memory): a first run right after the cube is written reads
	# it back from disk, 8.3 s against 5.6 s once cached.
	cat "$cube" >/dev/null
	fixed_cost
	learn_vs large "$cube" 224 $((4096 * 4096))

	# Four Sentinel-2 tiles' worth of pixels (2 x 2 tiles of 10,980), 4
	# bands, two dates, each 3.9 GB.
	side=21960
	mkdir -p "$OUT/region"
	for d in before:1 after:2; do
		f=$OUT/region/${d%:*}.tif
		[ -f "$f" ] || $B demo synth --bands 4 --width $side --height $side --type uint16 --block 512 --seed "${d#*:}" --out "$f" --quiet
	done
	say "== change over a region of $side x $side pixels, 4 bands, two dates, in 4 shards one after another (target: no stage above 1 GiB peak)"
	read -r ts _ ps < <(REPEAT=1 staged "bandfold change in 4 shards" "$OUT/region/staged" 4 "$OUT/region/before.tif" "$OUT/region/after.tif")
	read -r t1 p1 < <(REPEAT=1 measure "bandfold change, single run" $B change "$OUT/region/before.tif" "$OUT/region/after.tif" --out "$OUT/region/single" --overwrite --quiet)
	say "   largest stage peak $ps MiB (the single run's $p1 MiB); ratio staged/single: time $(ratio "$ts" "$t1")"
	say "results in $RES"
	exit 0
fi

cube=$OUT/cube224.tif
scene=$OUT/scene7.tif
scene2=$OUT/scene7b.tif
[ -f "$cube" ] || $B demo synth --bands 224 --width 1024 --height 1024 --type int16 --out "$cube" --quiet
[ -f "$scene" ] || $B demo synth --bands 7 --width 8192 --height 8192 --type uint16 --block 512 --out "$scene" --quiet
[ -f "$scene2" ] || $B demo synth --bands 7 --width 8192 --height 8192 --type uint16 --block 512 --seed 2 --out "$scene2" --quiet
cat "$cube" "$scene" "$scene2" >/dev/null # warm the page cache for every contender alike

say "== learn (target: <= 1.3x the read floor and <= 0.10x numpy on both cubes; peak <= 256 MiB)"
fixed_cost
learn_vs cube224 "$cube" 224 $((1024 * 1024))
learn_vs scene7 "$scene" 7 $((8192 * 8192))

say "== learn --method mnf against --method pca, 224-band cube (target: mnf <= 1.5x pca; peak <= 256 MiB)"
read -r tp _ < <(measure "bandfold learn --method pca cube224" $B learn "$cube" --method pca --out "$OUT/basis-pca.json" --overwrite --quiet)
read -r tm rssm < <(measure "bandfold learn --method mnf cube224" $B learn "$cube" --method mnf --out "$OUT/basis-mnf.json" --overwrite --quiet)
say "   ratio mnf/pca: time $(ratio "$tm" "$tp"), peak $rssm MiB"

say "== fold (target: <= 1.0x GDAL alone reading the input and writing an output of the same size; peak <= 256 MiB)"
for spec in "$cube 10 cube224" "$scene 3 scene7"; do
	set -- $spec
	read -r t rss < <(measure "bandfold fold $3 k=$2" $B fold "$1" --basis "$OUT/basis-$3.json" -k "$2" --out "$OUT/$3.components.tif" --overwrite --quiet)
	# GDAL alone: read every band of the input tile by tile and write k
	# float32 bands with bandfold's creation options (bench_reference.py).
	read -r tg _ < <(measure "GDAL read all + write $2 bands $3" $PY $REF gdal-fold "$1" "$2" "$OUT/$3.gdal.tif")
	# The same, writing bandfold's own scores: the compressor's work
	# depends on the content, and scores compress worse than stand-ins.
	# They are read from an uncompressed copy (made untimed), so that GDAL
	# does not also pay for decompressing them.
	gdal_translate -q -co TILED=YES -co BIGTIFF=IF_SAFER "$OUT/$3.components.tif" "$OUT/$3.scores-raw.tif"
	read -r ts _ < <(measure "GDAL read all + write $2 bands $3 (fold's scores)" $PY $REF gdal-fold "$1" "$2" "$OUT/$3.gdal-scores.tif" "$OUT/$3.scores-raw.tif")
	say "   ratio bandfold/GDAL: time $(ratio "$t" "$tg") (stand-in values, $(du -m "$OUT/$3.gdal.tif" | cut -f1) MB), $(ratio "$t" "$ts") (fold's scores, $(du -m "$OUT/$3.gdal-scores.tif" | cut -f1) MB; fold wrote $(du -m "$OUT/$3.components.tif" | cut -f1) MB)"
	read -r _ c < <(profile "fold-$3" $B fold "$1" --basis "$OUT/basis-$3.json" -k "$2" --out "$OUT/$3.components.tif" --overwrite --quiet)
	say "   the run's CPU over $(nproc) cores against GDAL alone writing fold's scores: $(ratio "$(ratio "$c" "$(nproc)")" "$ts") (no schedule of this work beats this ratio)"
done

say "== fold to an error budget, 224-band cube (target: <= 0.6x the bytes of --type int16 at the basis's k, at no higher RMSE; <= 1.3x its time)"
bc=$OUT/basis-cube224.json
read -r t16 _ < <(measure "bandfold fold --type int16 (99% variance k)" $B fold "$cube" --basis "$bc" --type int16 --out "$OUT/cube224.int16.tif" --overwrite --quiet)
rmse=$($B unfold "$OUT/cube224.int16.tif" --basis "$bc" --out "$OUT/cube224.restored.tif" --compare "$cube" --overwrite --quiet --json | $PY -c 'import json,sys; print(json.load(sys.stdin)["rmse"])')
read -r tb _ < <(measure "bandfold fold --max-rmse $rmse" $B fold "$cube" --basis "$bc" --max-rmse "$rmse" --out "$OUT/cube224.budget.tif" --overwrite --quiet)
b16=$(stat -c %s "$OUT/cube224.int16.tif") bb=$(stat -c %s "$OUT/cube224.budget.tif")
achieved=$($B fold "$cube" --basis "$bc" --max-rmse "$rmse" --out "$OUT/cube224.budget.tif" --overwrite --quiet --json | $PY -c 'import json,sys; d=json.load(sys.stdin); print(d["achieved_rmse"], d["components"], d["type"])')
say "   int16: $b16 bytes, rmse $rmse; budget: $bb bytes, achieved rmse, k, type: $achieved"
say "   ratio budget/int16: bytes $(ratio "$bb" "$b16"), time $(ratio "$tb" "$t16")"

say "== change on two 7-band 8192 x 8192 scenes (target: <= 1.5x its I/O floor; peak <= 512 MiB)"
read -r tl _ < <(measure "bandfold learn both scenes" $B learn "$scene" "$scene2" --out "$OUT/basis-pair.json" --overwrite --quiet)
read -r tc rc < <(measure "bandfold change" $B change "$scene" "$scene2" --out "$OUT/change" --overwrite --quiet)
# What change cannot avoid: GDAL reading both dates twice, writing change's
# own Z as float32 with its compression, and GDAL's sieve on a Byte map of
# the scene's size (bench_reference.py change-floor).
tf=$(floor change-floor "$scene" "$scene2" "$OUT/change" "$OUT/z-floor.tif")
read -r tn _ < <(measure "bandfold change --normalize none" $B change "$scene" "$scene2" --normalize none --out "$OUT/change-none" --overwrite --quiet)
say "   ratio change/I/O floor: time $(ratio "$tc" "$tf"); change/learn: time $(ratio "$tc" "$tl"); normalisation's cost: change/change --normalize none $(ratio "$tc" "$tn") (target <= 1.10)"
read -r _ c < <(profile change $B change "$scene" "$scene2" --out "$OUT/change" --overwrite --quiet)
say "   the run's CPU over $(nproc) cores against the I/O floor: $(ratio "$(ratio "$c" "$(nproc)")" "$tf") (no schedule of this work beats this ratio)"

say "== change in stages on the same scenes, 4 shards one after another (target: <= 1.25x the single run in total; each map stage's peak <= the single run's)"
read -r tst mst _ < <(staged "bandfold change in 4 shards" "$OUT/change-staged" 4 "$scene" "$scene2")
say "   ratio staged/single: time $(ratio "$tst" "$tc"); largest map stage's peak $mst MiB, the single run's $rc MiB (ratio $(ratio "$mst" "$rc"))"

say "== timeline of five 7-band 4096 x 4096 scenes (target: <= 1.5x the four change runs it replaces; peak <= 512 MiB, whatever the number of dates)"
series=()
for i in $(seq 1 10); do
	f=$OUT/series/scene-$((2010 + i))-07-01.tif
	mkdir -p "$OUT/series"
	[ -f "$f" ] || $B demo synth --bands 7 --width 4096 --height 4096 --type uint16 --block 512 --seed "$((10 + i))" --out "$f" --quiet
	series+=("$f")
done
cat "${series[@]}" >/dev/null
read -r tt pt5 < <(measure "bandfold timeline, 5 scenes" $B timeline "${series[@]:0:5}" --out "$OUT/timeline" --overwrite --quiet)
read -r _ pt10 < <(REPEAT=1 measure "bandfold timeline, 10 scenes" $B timeline "${series[@]}" --out "$OUT/timeline10" --overwrite --quiet)
say "   peak: five dates $pt5 MiB, ten dates $pt10 MiB (ratio $(ratio "$pt10" "$pt5"))"
# shellcheck disable=SC2016 # $1..$5 are bash -c's positional arguments
read -r t4 _ < <(measure "bandfold change on the 4 consecutive pairs" bash -c 'set -e; B=$1; O=$2; shift 2
	for i in 1 2 3 4; do j=$((i + 1)); $B change "${!i}" "${!j}" --out "$O/pair$i" --overwrite --quiet; done' _ "$B" "$OUT" "${series[@]:0:5}")
say "   ratio timeline/four changes: time $(ratio "$tt" "$t4")"

say "== batch fold: 20 demo-sized scenes (2048 x 2048 x 8)"
mkdir -p "$OUT/batch/in"
for i in $(seq 1 20); do
	f=$OUT/batch/in/scene$i.tif
	[ -f "$f" ] || $B demo synth --bands 8 --width 2048 --height 2048 --type uint16 --seed "$i" --out "$f" --quiet
done
$B learn "$OUT/batch/in/scene1.tif" --out "$OUT/batch/basis.json" --overwrite --quiet
rm -rf "$OUT/batch/one" "$OUT/batch/all" && mkdir -p "$OUT/batch/one" "$OUT/batch/all"
read -r t1 _ < <(REPEAT=1 measure "20 scenes one by one" bash -c "for f in $OUT/batch/in/*.tif; do $B fold \$f --basis $OUT/batch/basis.json --out $OUT/batch/one/\$(basename \$f .tif).c.tif --quiet || exit 1; done")
read -r tb _ < <(REPEAT=1 measure "20 scenes in one batch" $B fold "$OUT/batch/in/*.tif" --basis "$OUT/batch/basis.json" --out-dir "$OUT/batch/all" --quiet)
say "   scenes per minute: one by one $(awk -v t="$t1" 'BEGIN{printf "%.1f", 20*60/t}'), batch $(awk -v t="$tb" 'BEGIN{printf "%.1f", 20*60/t}')"

say "results in $RES"
