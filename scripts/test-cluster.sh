#!/usr/bin/env bash
# test-cluster.sh: runs bandfold's sharded commands on a real, throw-away,
# single-node Slurm cluster on loopback, and checks their results against
# single-machine runs. Run by "make test-cluster" from the repo root.
#
#   job 1: a 4-task array of "learn --shard auto --partial" over the Landsat
#          test scene, then an afterok-dependent "merge"; each task must have
#          written its own shard, and the merged basis must equal the
#          single-machine basis (eigenvalues, covariance, mean: 1e-12 relative).
#   job 2: a 3-task array of the batch "fold --shard auto" over 6 synthetic
#          scenes; task i must fold exactly the scenes at list positions i and
#          i+3, every output must exist, carry its BANDFOLD_COMPLETE record
#          and equal the single-machine fold bit for bit; a second array over
#          the same list must skip every scene and leave the outputs untouched.
#
#   job 3: a staged "change" of two of those scenes: a 3-task scan array, the
#          fit, a 3-task map array and the finish, chained with afterok
#          (stage.sbatch); change.tif, magnitude.tif and summary.json
#          must equal a single-machine change bit for bit.
#   job 4: a staged "timeline" of three of those scenes through the same
#          stage.sbatch; steps.tif, first-change.tif, max-magnitude.tif and
#          timeline.json must equal a single-machine timeline bit for bit.
# The job scripts are the examples in examples/slurm (learn-array.sbatch,
# merge.sbatch, fold-array.sbatch), so the examples are tested too; the sbatch
# command line overrides their #SBATCH sizes to fit this 2-core node.
#
# Everything (munge key and socket, slurm.conf, state, spool, logs, job files)
# lives in a private folder from mktemp -d, the daemons listen on 127.0.0.1
# only, on free non-default ports, and are stopped by PID whatever happens
# (EXIT trap, plus a watchdog in its own session that cleans up if this
# script is killed outright). One run at a time (flock). Needs root (or
# passwordless sudo); installs slurm-wlm, munge, jq and gdal-bin from Debian
# when missing (scripts/deps.sh). Ends with "cluster: N passed, M failed".
#
# Environment:
#   BANDFOLD                 binary to test (default ./bin/bandfold)
#   TEST_CLUSTER_PORT        first port tried for slurmctld (default 16917;
#                            slurmd gets the next one)
#   TEST_CLUSTER_TIMEOUT     seconds to wait for the jobs (default 60)
#   TEST_CLUSTER_FAIL_TASK   harness self-test: this learn task exits 1, so
#                            the run must report FAIL (and not hang)
#   TEST_CLUSTER_KEEP=1      keep the private folder (its path is printed)
# shellcheck disable=SC2317 # functions run from traps and command substitutions
set -Eeuo pipefail
umask 022

SELF=$(readlink -f "${BASH_SOURCE[0]}")
REPO=$(dirname "$(dirname "$SELF")")
TMPROOT=$(readlink -f "${TMPDIR:-/tmp}")
LOCK=$TMPROOT/bandfold-test-cluster.lock
LAST=$TMPROOT/bandfold-test-cluster.last   # private folder of the latest run
MARK=.bandfold-test-cluster                        # marks a folder as ours
NODE=localhost PART=bftest

alive() { # process exists and is not a zombie
	local s
	[ -n "${1:-}" ] && { read -r s <"/proc/$1/stat"; } 2>/dev/null || return 1
	s=${s##*) }
	[ "${s%% *}" != Z ]
}

# ---------------------------------------------------------------------------
# Cleanup of one run's folder: shared by the EXIT trap and the watchdog.
# Touches only processes recorded in $base/pids whose command line names
# $base, and processes whose working folder lies inside $base (slurmstepd and
# the job steps it left behind).
stop_pid() { # base name: TERM, then KILL after 10 s
	local base=$1 f=$1/pids/$2.pid pid
	pid=$(cat "$f" 2>/dev/null) || return 0
	if alive "$pid" && grep -qF "$base" "/proc/$pid/cmdline" 2>/dev/null; then
		kill -TERM "$pid" 2>/dev/null || true
		for _ in $(seq 100); do alive "$pid" || break; sleep 0.1; done
		alive "$pid" && kill -KILL "$pid" 2>/dev/null
	fi
	wait "$pid" 2>/dev/null || true
	return 0
}
procs_inside() { # PIDs of processes whose cwd is inside $1
	local p cwd
	for p in /proc/[0-9]*; do
		cwd=$(readlink "$p/cwd" 2>/dev/null) || continue
		case "$cwd/" in "$1"/*) echo "${p#/proc/}" ;; esac
	done
	return 0
}
ctl_alive() { alive "$(cat "$1/pids/slurmctld.pid" 2>/dev/null)"; }
cleanup_run() { # base
	local base=$1 ids pid
	[ -f "$base/$MARK" ] || return 0
	export SLURM_CONF=$base/etc/slurm.conf
	if ctl_alive "$base"; then
		# running jobs survive "scontrol shutdown": cancel them first
		ids=$(timeout 3 squeue -h -o %A 2>/dev/null | sort -u | tr '\n' ' ') || true
		if [ -n "${ids// /}" ]; then
			# shellcheck disable=SC2086
			timeout 5 scancel $ids 2>/dev/null || true
			for _ in $(seq 50); do
				[ -z "$(timeout 3 squeue -h -o %A 2>/dev/null)" ] && break
				sleep 0.1
			done
		fi
		timeout 5 scontrol shutdown >/dev/null 2>&1 || true
		for _ in $(seq 100); do
			ctl_alive "$base" || alive "$(cat "$base/pids/slurmd.pid" 2>/dev/null)" || break
			sleep 0.1
		done
	fi
	for d in slurmd slurmctld munged; do stop_pid "$base" "$d"; done
	# slurmstepd ignores SIGTERM and outlives slurmd; its cwd is our spool
	for pid in $(procs_inside "$base"); do
		[ "$pid" = "$$" ] || kill -KILL "$pid" 2>/dev/null || true
	done
	sleep 0.2
	return 0
}
leftovers() { # what of ours is still running, for the teardown check
	local base=$1 d pid
	for d in slurmd slurmctld munged; do
		pid=$(cat "$base/pids/$d.pid" 2>/dev/null) || continue
		alive "$pid" && echo "$d($pid)"
	done
	for pid in $(procs_inside "$base"); do
		[ "$pid" = "$$" ] || echo "$(cat "/proc/$pid/comm" 2>/dev/null)($pid)"
	done
	return 0
}
remove_run() { # base: delete the folder if it is one of ours
	case "$1" in "$TMPROOT"/bandfold-cluster.*) ;; *) return 0 ;; esac
	[ -f "$1/$MARK" ] && rm -rf "$1"
	return 0
}

# Watchdog mode: "test-cluster.sh --reap BASE PID", started in its own session;
# waits for the harness PID to go, then cleans up whatever it left.
if [ "${1:-}" = --reap ]; then
	base=$2 harness=$3
	trap '' HUP INT
	while alive "$harness"; do sleep 0.5; done
	if [ -f "$base/$MARK" ]; then
		cleanup_run "$base"
		[ "${TEST_CLUSTER_KEEP:-0}" = 1 ] || remove_run "$base"
		[ "$(cat "$LAST" 2>/dev/null)" = "$base" ] && rm -f "$LAST"
	fi
	exit 0
fi

# ---------------------------------------------------------------------------
if [ "$(id -u)" != 0 ]; then
	if command -v sudo >/dev/null && sudo -n true 2>/dev/null; then
		exec sudo -n --preserve-env=BANDFOLD,TMPDIR,TEST_CLUSTER_PORT,TEST_CLUSTER_TIMEOUT,TEST_CLUSTER_FAIL_TASK,TEST_CLUSTER_KEEP,PATH \
			bash "$SELF" "$@"
	fi
	echo "test-cluster: the Slurm daemons must run as root: run as root or with passwordless sudo" >&2
	exit 2
fi

T0=$(date +%s%N)
log() { printf '[%6.2fs] %s\n' "$(($(date +%s%N) - T0))e-9" "$*"; }
PASSED=0 FAILED=0 FAILS=() BASE='' REAPER='' ABORTED='' SIGNAL=''
pass() { PASSED=$((PASSED + 1)); log "PASS $1"; }
failed() { FAILED=$((FAILED + 1)); FAILS+=("$1"); log "FAIL $1${2:+: $2}"; }
die() { failed "$1" "${2:-}"; ABORTED=1; exit 1; } # the EXIT trap tears down and reports

BANDFOLD=${BANDFOLD:-./bin/bandfold}
SCENE=$REPO/testdata/external/L7_ETMs.tif
JOB_TIMEOUT=${TEST_CLUSTER_TIMEOUT:-60}
FAIL_TASK=${TEST_CLUSTER_FAIL_TASK:-none}

# Debian packages: Slurm and munge, jq for the JSON checks, GDAL's tools
bash "$REPO/scripts/deps.sh" slurm-wlm munge jq gdal-bin
for c in munged munge unmunge mungekey slurmctld slurmd sbatch scontrol sinfo squeue scancel jq gdalinfo gdal_translate flock setsid timeout; do
	command -v "$c" >/dev/null || { echo "test-cluster: $c is missing" >&2; exit 2; }
done
command -v "$BANDFOLD" >/dev/null || [ -x "$BANDFOLD" ] || {
	echo "test-cluster: no bandfold binary at $BANDFOLD (run make build, or set BANDFOLD)" >&2
	exit 2
}
BF=$(readlink -f "$(command -v "$BANDFOLD" || echo "$BANDFOLD")")
[ -f "$SCENE" ] || (cd "$REPO" && bash scripts/testdata.sh)

# one run at a time: a second slurmd with the same files would kill the first
exec 9>"$LOCK"
if ! flock -n 9; then
	echo "test-cluster: waiting for another run to finish (lock $LOCK)" >&2
	flock -w 120 9 || { echo "test-cluster: another run still holds $LOCK" >&2; exit 2; }
fi
# a run killed outright (its watchdog too) may have left daemons behind
prev=$(cat "$LAST" 2>/dev/null || true)
if [ -n "$prev" ] && [ -f "$prev/$MARK" ]; then
	log "cleaning up after an earlier run that was killed: $prev"
	cleanup_run "$prev"
	remove_run "$prev"
fi

# no inherited Slurm settings: they would steer sbatch, squeue and the jobs
for v in $(compgen -e | grep -E '^(SLURM|SBATCH|SALLOC|SRUN|SQUEUE|SINFO|SCONTROL|SACCT)_' || true); do unset "$v"; done

BASE=$(mktemp -d "$TMPROOT/bandfold-cluster.XXXXXX")
touch "$BASE/$MARK"
echo "$BASE" >"$LAST"
mkdir -p "$BASE"/{etc,log,pids,jobs,state/ctld,state/d,munge/etc,munge/lib,munge/run,work/logs,work/scenes,work/single-folds}
chmod 755 "$BASE" "$BASE/munge" "$BASE/munge/run" # munged: the socket folder must be o+x
chmod 700 "$BASE/munge/etc" "$BASE/munge/lib"
export SLURM_CONF=$BASE/etc/slurm.conf
W=$BASE/work

teardown() {
	local rc=$? left
	set +eE
	trap - EXIT ERR
	trap '' INT TERM HUP
	if [ -n "$BASE" ]; then
		[ -n "$ABORTED" ] && [ "$rc" != 0 ] && dump_logs
		cleanup_run "$BASE"
		left=$(leftovers "$BASE" | tr '\n' ' ')
		if [ -z "$left" ]; then pass "teardown: jobs cancelled, daemons stopped, nothing left running"
		else failed "teardown" "still running: $left"; fi
		if [ "${TEST_CLUSTER_KEEP:-0}" = 1 ]; then log "kept $BASE"; else remove_run "$BASE"; fi
		[ "$(cat "$LAST" 2>/dev/null)" = "$BASE" ] && rm -f "$LAST"
	fi
	if [ -n "$REAPER" ]; then kill -TERM "$REAPER" 2>/dev/null; wait "$REAPER" 2>/dev/null; fi
	if [ -n "$SIGNAL" ]; then failed "harness" "stopped by SIG$SIGNAL"
	elif [ "$rc" != 0 ] && [ "$FAILED" = 0 ]; then failed "harness" "exited with status $rc"; fi
	if [ "$FAILED" = 0 ]; then
		log "PASS: bandfold on Slurm: all $PASSED checks passed"
	else
		log "FAIL: bandfold on Slurm: $(printf '%s; ' "${FAILS[@]}" | sed 's/; $//')"
	fi
	echo "cluster: $PASSED passed, $FAILED failed"
	[ "$FAILED" = 0 ] && exit 0
	exit 1
}
trap teardown EXIT
trap 'SIGNAL=TERM; exit 143' TERM
trap 'SIGNAL=INT; exit 130' INT
trap 'SIGNAL=HUP; exit 129' HUP

# harmless lines of a fresh private cluster, left out when logs are shown
noise='mpi/pmix|MPI: Cannot create context|Couldn.t load specified plugin name for mpi|Trying backup state save file|No such file or directory|Unauthorized credential|CPU frequency setting not configured|mcs plugin|MCSParameters|backup_controller not specified'
dump_logs() {
	local f
	for f in "$BASE"/log/*.log "$W"/logs/*; do
		[ -s "$f" ] || continue
		echo "== ${f#"$BASE"/} (last lines, known noise left out)"
		grep -Ev "$noise" "$f" | tail -n 12
	done
	return 0
}

# the watchdog cleans up if this shell dies without running its EXIT trap
setsid bash "$SELF" --reap "$BASE" "$$" </dev/null >/dev/null 2>&1 &
REAPER=$!

# ---------------------------------------------------------------------------
# the cluster
port_free() { ! (exec 3<>"/dev/tcp/127.0.0.1/$1") 2>/dev/null; }
CTLD_PORT=
p=${TEST_CLUSTER_PORT:-16917}
for _ in $(seq 20); do
	if port_free "$p" && port_free "$((p + 1))"; then CTLD_PORT=$p; break; fi
	p=$((p + 2))
done
[ -n "$CTLD_PORT" ] || die "cluster start" "no two free ports from ${TEST_CLUSTER_PORT:-16917} on"
SLURMD_PORT=$((CTLD_PORT + 1))

# munge with a private key and socket (the system's /etc/munge is not used)
KEY=$BASE/munge/etc/munge.key SOCK=$BASE/munge/run/munge.socket.2
mungekey --create --keyfile="$KEY" 2>/dev/null || dd if=/dev/urandom of="$KEY" bs=1024 count=1 status=none
chmod 400 "$KEY"
munged --foreground --socket="$SOCK" --key-file="$KEY" --pid-file="$BASE/munge/run/munged.pid" \
	--seed-file="$BASE/munge/lib/munged.seed" --log-file="$BASE/log/munged.log" \
	</dev/null >"$BASE/log/munged.out" 2>&1 9>&- &
echo $! >"$BASE/pids/munged.pid"
for _ in $(seq 50); do
	munge -n -S "$SOCK" 2>/dev/null | unmunge -S "$SOCK" >/dev/null 2>&1 && break
	sleep 0.1
done
munge -n -S "$SOCK" 2>/dev/null | unmunge -S "$SOCK" >/dev/null 2>&1 || die "cluster start" "munged does not answer"

# hardware as slurmd sees it, so that slurmd does not refuse the node
HW=$(slurmd -C 2>/dev/null | sed -n '1s/^NodeName=[^ ]* \(CPUs=.*\) RealMemory=.*/\1/p')
[ -n "$HW" ] || HW="CPUs=$(nproc)"
# memory the jobs may ask for (--mem): half of what the machine has, in MiB,
# so that slurmd never finds less than configured and drains the node
MEM=$(awk '/^MemTotal:/ {print int($2 / 2048)}' /proc/meminfo)
COMM=NoInAddrAny # slurmd binds NodeAddr only; slurmctld binds the address of the host name
if getent ahostsv4 "$(uname -n)" | awk 'NR==1{exit !($1 ~ /^127\./)}'; then
	COMM=NoCtldInAddrAny,$COMM
else
	log "WARN: $(uname -n) does not resolve to loopback: slurmctld listens on all addresses on port $CTLD_PORT"
fi
cat >"$SLURM_CONF" <<EOF
# private throw-away cluster of scripts/test-cluster.sh
ClusterName=bandfold-test
SlurmctldHost=$NODE(127.0.0.1)
SlurmctldPort=$CTLD_PORT
SlurmdPort=$SLURMD_PORT
SlurmUser=root
SlurmdUser=root
AuthType=auth/munge
CredType=cred/munge
AuthInfo=socket=$SOCK
CommunicationParameters=$COMM
StateSaveLocation=$BASE/state/ctld
SlurmdSpoolDir=$BASE/state/d
SlurmctldPidFile=$BASE/state/slurmctld.pid
SlurmdPidFile=$BASE/state/slurmd.pid
SlurmctldLogFile=$BASE/log/slurmctld.log
SlurmdLogFile=$BASE/log/slurmd.log
SlurmctldDebug=info
SlurmdDebug=info
# no cgroups, no accounting database: nothing outside this folder is needed
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
JobAcctGatherType=jobacct_gather/none
AccountingStorageType=accounting_storage/none
JobCompType=jobcomp/none
MpiDefault=none
MailProg=/bin/true
SelectType=select/cons_tres
SelectTypeParameters=CR_Core
# a failed array must cancel its dependent job, not leave it pending forever
DependencyParameters=kill_invalid_depend
ReturnToService=2
MinJobAge=600
# start batch jobs as soon as resources free up (default: up to 3 s later)
SchedulerParameters=batch_sched_delay=0
NodeName=$NODE NodeAddr=127.0.0.1 $HW RealMemory=$MEM State=UNKNOWN
PartitionName=$PART Nodes=$NODE Default=YES MaxTime=INFINITE State=UP
EOF

slurmctld -D -f "$SLURM_CONF" </dev/null >"$BASE/log/slurmctld.out" 2>&1 9>&- &
echo $! >"$BASE/pids/slurmctld.pid"
up=
for _ in $(seq 100); do
	if scontrol ping 2>/dev/null | grep -q 'is UP'; then up=1; break; fi
	ctl_alive "$BASE" || break
	sleep 0.2
done
[ -n "$up" ] || die "cluster start" "slurmctld does not answer"
(cd "$BASE/state/d" && exec slurmd -D -N "$NODE" -f "$SLURM_CONF") </dev/null >"$BASE/log/slurmd.out" 2>&1 9>&- &
echo $! >"$BASE/pids/slurmd.pid"
state=
for _ in $(seq 150); do
	alive "$(cat "$BASE/pids/slurmd.pid")" || die "cluster start" "slurmd died"
	state=$(sinfo -h -n "$NODE" -o %T 2>/dev/null || true)
	case "$state" in
	idle) break ;;
	down* | drain* | fail*) scontrol update NodeName="$NODE" State=RESUME 2>/dev/null || true ;;
	esac
	sleep 0.2
done
[ "$state" = idle ] || die "cluster start" "node is '$state': $(scontrol show node "$NODE" 2>&1 | grep -o 'Reason=.*')"
pass "cluster start: munged, slurmctld (127.0.0.1:$CTLD_PORT) and slurmd (127.0.0.1:$SLURMD_PORT) up, node idle"

# ---------------------------------------------------------------------------
# the inputs of job 2: 6 small synthetic scenes and a basis fitted on them
FOLD_HELP=$("$BF" fold --help 2>&1 || true)
HAVE_FOLD=
grep -q -- '--out-dir' <<<"$FOLD_HELP" && HAVE_FOLD=1
if [ -n "$HAVE_FOLD" ]; then
	for s in 1 2 3 4 5 6; do
		"$BF" --quiet demo synth --bands 8 --width 512 --height 512 --type uint16 --seed "$s" \
			--out "$W/scenes/scene-$s.tif" || die "fold inputs" "demo synth failed"
		echo "$W/scenes/scene-$s.tif" >>"$W/scenes.txt"
	done
	"$BF" --quiet learn "$W"/scenes/scene-*.tif --out "$W/synth.basis.json" || die "fold inputs" "learn on the synthetic scenes failed"
fi

# ---------------------------------------------------------------------------
# The jobs are the examples in examples/slurm, so these are tested too; the
# command line overrides their #SBATCH sizes to fit this small node.
EX=$REPO/examples/slurm
for f in learn-array.sbatch merge.sbatch fold-array.sbatch stage.sbatch; do
	[ -f "$EX/$f" ] || die "job scripts" "$EX/$f is missing"
done
LEARN_BF=$BF
if [ "$FAIL_TASK" != none ]; then # harness self-test: one learn task fails
	LEARN_BF=$BASE/jobs/bandfold-failing
	cat >"$LEARN_BF" <<EOF
#!/bin/bash
[ "\$SLURM_ARRAY_TASK_ID" != $(printf %q "$FAIL_TASK") ] || { echo "failing on purpose (TEST_CLUSTER_FAIL_TASK)" >&2; exit 1; }
exec $(printf %q "$BF") "\$@"
EOF
	chmod 755 "$LEARN_BF"
fi

submit() { # name sbatch-args... : prints the job id
	local out id
	out=$(sbatch --parsable --chdir="$W" --cpus-per-task=1 --mem=256M --time=5 "$@" 2>&1) || {
		echo "sbatch: $out" >&2
		return 1
	}
	id=${out%%;*}
	[[ "$id" =~ ^[0-9]+$ ]] || { echo "sbatch: $out" >&2; return 1; }
	echo "$id"
}

submit_fold() { # log-prefix: the 3-task fold array
	BANDFOLD=$BF LIST=$W/scenes.txt BASIS=$W/synth.basis.json OUT=$W/folds \
		submit --array=0-2 -J "bf-$1" -o "$W/logs/$1_%A_%a.out" -e "$W/logs/$1_%A_%a.err" "$EX/fold-array.sbatch"
}

LEARN_ID=$(BANDFOLD=$LEARN_BF SCENE=$SCENE RUN=$W TILE=64 \
	submit --array=0-3 -J bf-learn -o "$W/logs/learn_%A_%a.out" "$EX/learn-array.sbatch") ||
	die "job 1 submit" "learn array"
MERGE_ID=$(BANDFOLD=$BF RUN=$W \
	submit --dependency=afterok:"$LEARN_ID" -J bf-merge -o "$W/logs/merge_%j.out" "$EX/merge.sbatch") ||
	die "job 1 submit" "merge job"
log "job 1: learn array $LEARN_ID (4 tasks), merge job $MERGE_ID (afterok:$LEARN_ID)"
FOLD_ID=
if [ -n "$HAVE_FOLD" ]; then
	FOLD_ID=$(submit_fold fold) ||
		die "job 2 submit" "fold array"
	log "job 2: fold array $FOLD_ID (3 tasks)"
fi

# single-machine references, computed while Slurm works
"$BF" --quiet learn "$SCENE" --tile 64 --out "$W/single.json" || die "reference" "single-machine learn failed"
if [ -n "$HAVE_FOLD" ]; then
	"$BF" --quiet fold "$W"/scenes/scene-*.tif --basis "$W/synth.basis.json" --ignore-band-names --out-dir "$W/single-folds" ||
		die "reference" "single-machine fold failed"
fi

# ---------------------------------------------------------------------------
# waiting: poll scontrol; sbatch --wait is not enough (it returns 0 for a job
# cancelled before it started), so the states and the outputs are checked.
job_table() { # id: "ArrayTaskId JobState ExitCode StartTime EndTime" per job or task
	timeout 10 scontrol -o show job "$1" 2>/dev/null | awk '{
		split("", v)
		for (i = 1; i <= NF; i++) { k = $i; sub(/=.*/, "", k); val = $i; sub(/^[^=]*=/, "", val); v[k] = val }
		print (v["ArrayTaskId"] == "" ? "-" : v["ArrayTaskId"]), v["JobState"], v["ExitCode"], v["StartTime"], v["EndTime"]
	}'
}
finished() { # id: every job or task of it is in a final state
	local t
	t=$(job_table "$1")
	[ -n "$t" ] && ! awk '$2 ~ /^(PENDING|RUNNING|CONFIGURING|COMPLETING|SUSPENDED|REQUEUED|RESIZING|SIGNALING|STAGE_OUT|STOPPED|RESV_DEL_HOLD|REQUEUE_FED|REQUEUE_HOLD)$/ {busy=1} END {exit !busy}' <<<"$t"
}
wait_jobs() { # ids...: until all finished, or JOB_TIMEOUT
	local deadline=$(($(date +%s) + JOB_TIMEOUT)) id all
	while :; do
		all=1
		for id in "$@"; do finished "$id" || { all=''; break; }; done
		[ -n "$all" ] && return 0
		alive "$$" || return 1 # in $(...): stop if the harness was killed
		ctl_alive "$BASE" || { echo "slurmctld died"; return 1; }
		alive "$(cat "$BASE/pids/slurmd.pid")" || { echo "slurmd died"; return 1; }
		[ "$(date +%s)" -lt "$deadline" ] || { echo "not finished after ${JOB_TIMEOUT}s"; return 1; }
		sleep 0.25
	done
}
all_completed() { # id count: exactly count jobs or tasks, each COMPLETED with exit code 0:0
	local t
	t=$(job_table "$1")
	[ "$(wc -l <<<"$t")" = "$2" ] && ! awk '$2 != "COMPLETED" || $3 != "0:0" {bad=1} END {exit !bad}' <<<"$t"
}
show_jobs() { job_table "$1" | awk '{printf "%s%s %s exit %s", sep, ($1 == "-" ? "job" : "task " $1), $2, $3; sep = "; "}'; }
tail_logs() { # glob pattern of job logs
	local f
	for f in $1; do [ -s "$f" ] && { echo "== ${f#"$W"/}"; tail -n 8 "$f"; }; done
	return 0
}

ids=("$LEARN_ID" "$MERGE_ID")
[ -n "$HAVE_FOLD" ] && ids+=("$FOLD_ID")
if why=$(wait_jobs "${ids[@]}"); then
	log "all jobs finished"
else
	log "waiting for the jobs: $why"
	for id in "${ids[@]}"; do log "  job $id: $(show_jobs "$id")"; done
	die "jobs finished" "$why"
fi

# ---------------------------------------------------------------------------
# job 1 checks
if all_completed "$LEARN_ID" 4; then
	pass "learn array: 4 tasks COMPLETED, exit 0"
else
	failed "learn array" "$(show_jobs "$LEARN_ID")"
	tail_logs "$W/logs/learn_*.out"
fi

check_merge_order() {
	all_completed "$MERGE_ID" 1 || { echo "merge job: $(show_jobs "$MERGE_ID")"; tail_logs "$W/logs/merge_*.out"; return 1; }
	local end start
	end=$(job_table "$LEARN_ID" | awk '{print $5}' | sort | tail -n 1)
	start=$(job_table "$MERGE_ID" | awk '{print $4}')
	[[ ! "$start" < "$end" ]] || { echo "merge started $start before the array ended $end"; return 1; }
}
if why=$(check_merge_order); then pass "merge job: COMPLETED after the whole array (afterok)"; else failed "merge job" "$why"; fi

check_partials() {
	local i
	for i in 0 1 2 3; do
		[ -s "$W/parts/part-$i.json" ] || { echo "parts/part-$i.json missing"; return 1; }
		jq -e --argjson i "$i" '.format == "bandfold-partial" and .shard == $i and .shards == 4 and .tile_size == 64' \
			"$W/parts/part-$i.json" >/dev/null || { echo "parts/part-$i.json is not shard $i/4 with 64-pixel tiles"; return 1; }
	done
	[ "$(find "$W/parts" -type f | wc -l)" = 4 ] || { echo "unexpected files in parts/"; return 1; }
	jq -en --slurpfile s "$W/single.json" '[inputs.state.count] | add == $s[0].pixels' "$W"/parts/part-*.json >/dev/null ||
		{ echo "the shards' pixel counts do not add up to the image's"; return 1; }
}
if why=$(check_partials); then pass "partials: one per task, shards 0..3 of 4, pixel counts add up"; else failed "partials" "$why"; fi

compare_bases() { # merged single: eigenvalues, covariance and mean within 1e-12 relative
	# prints the differences (jq's stderr); the status says whether they pass
	# shellcheck disable=SC2069
	jq -en --slurpfile m "$1" --slurpfile s "$2" '
		def fabs: if . < 0 then -. else . end;
		def rel(a; b): if (a | length) != (b | length) then 1e300
			else ([a, b] | transpose | map((.[0] - .[1]) | fabs) | max) / ([b[] | fabs] | max) end;
		$m[0] as $m | $s[0] as $s
		| { pixels: ($m.pixels == $s.pixels),
		    eigenvalues: rel($m.eigenvalues; $s.eigenvalues),
		    covariance: rel($m.covariance | flatten; $s.covariance | flatten),
		    mean: rel($m.mean; $s.mean) }
		| stderr
		| .pixels and .eigenvalues <= 1e-12 and .covariance <= 1e-12 and .mean <= 1e-12' 2>&1 >/dev/null
}
why=
if [ -s "$W/basis.json" ] && why=$(compare_bases "$W/basis.json" "$W/single.json"); then
	pass "merged basis equals the single-machine basis (relative differences $why)"
else
	failed "merged basis" "${why:-basis.json missing}"
fi

# ---------------------------------------------------------------------------
# job 2 checks
if [ -z "$HAVE_FOLD" ]; then
	failed "fold array" "$BF has no batch fold yet (fold --help does not mention --out-dir)"
	exit 1
fi

if all_completed "$FOLD_ID" 3; then
	pass "fold array: 3 tasks COMPLETED, exit 0"
else
	failed "fold array" "$(show_jobs "$FOLD_ID")"
	tail_logs "$W/logs/fold_*"
fi

# which task did what, from the --json lines each task printed on stdout: task
# i must have handled exactly the scenes at list positions i and i+3
check_split() { # log-prefix array-id status
	local i f
	for i in 0 1 2; do
		f=$W/logs/$1_$2_$i.out
		jq -es --argjson i "$i" --arg st "$3" '
			(map(select(has("input")) | {scene: (.input | sub(".*/"; "")), status})
			 == [{scene: "scene-\($i + 1).tif", status: $st}, {scene: "scene-\($i + 4).tif", status: $st}])
			and (map(select(has("shard"))) | length == 1 and .[0].shard == "\($i)/3" and .[0].scenes == 2 and .[0].failed == 0)' \
			"$f" >/dev/null 2>&1 || { echo "task $i ($1_$2_$i.out) did not handle exactly scenes $((i + 1)) and $((i + 4)) as $3: $(tr '\n' ' ' <"$f" | cut -c1-400)"; return 1; }
	done
}
if why=$(check_split fold "$FOLD_ID" written); then pass "fold split: task i wrote exactly the scenes at list positions i and i+3"; else failed "fold split" "$why"; fi

check_fold_outputs() {
	local s out n
	n=$(find "$W/folds" -type f -name '*.tif' 2>/dev/null | wc -l)
	[ "$n" = 6 ] || { echo "$n component images in folds/, want 6"; return 1; }
	for s in 1 2 3 4 5 6; do
		out=$W/folds/scene-$s.components.tif
		[ -s "$out" ] || { echo "folds/scene-$s.components.tif missing"; return 1; }
		gdalinfo "$out" 2>/dev/null | grep -q 'BANDFOLD_COMPLETE=' ||
			{ echo "folds/scene-$s.components.tif has no BANDFOLD_COMPLETE record"; return 1; }
	done
	# each image's STAC Item beside it, and nothing else left behind
	# (temporary files of an interrupted write)
	for s in 1 2 3 4 5 6; do
		[ -s "$W/folds/scene-$s.components.item.json" ] || { echo "folds/scene-$s.components.item.json missing"; return 1; }
	done
	n=$(find "$W/folds" -mindepth 1 | wc -l)
	[ "$n" = 12 ] || { echo "folds/ holds $n entries, want the 6 images and their 6 STAC Items only: $(find "$W/folds" -mindepth 1 -printf '%f ')"; return 1; }
}
if why=$(check_fold_outputs); then pass "fold outputs: 6 component images, each with its BANDFOLD_COMPLETE record and its STAC Item"; else failed "fold outputs" "$why"; fi

same_image() { # a b: same grid, georeferencing, band types and pixels
	local a=$1 b=$2 shape
	shape='{size, geoTransform, wkt: .coordinateSystem.wkt, bands: [.bands[] | {type, noDataValue}]}'
	[ "$(gdalinfo -json "$a" | jq -c "$shape")" = "$(gdalinfo -json "$b" | jq -c "$shape")" ] ||
		{ echo "${a##*/}: size, georeferencing or band types differ"; return 1; }
	# pixels compared bit for bit: both written out raw (ENVI, band sequential)
	if ! gdal_translate -q -of ENVI "$a" "$W/cmp-a.raw" || ! gdal_translate -q -of ENVI "$b" "$W/cmp-b.raw"; then
		echo "${a##*/}: gdal_translate failed"
		return 1
	fi
	cmp -s "$W/cmp-a.raw" "$W/cmp-b.raw" || {
		echo "${a##*/}: pixels differ (band checksums $(gdalinfo -checksum "$a" | grep -o 'Checksum=[0-9]*' | tr '\n' ' ')vs $(gdalinfo -checksum "$b" | grep -o 'Checksum=[0-9]*' | tr '\n' ' '))"
		return 1
	}
	rm -f "$W"/cmp-[ab].*
}
check_fold_equal() {
	local s
	for s in 1 2 3 4 5 6; do
		same_image "$W/folds/scene-$s.components.tif" "$W/single-folds/scene-$s.components.tif" || return 1
	done
}
if why=$(check_fold_equal); then pass "fold outputs equal the single-machine fold pixel for pixel"; else failed "fold equality" "$why"; fi

# a second array over the same list, started once the first one's outputs are
# fingerprinted, must skip every scene: inode, size, mtime and content unchanged
fingerprint() { (cd "$W/folds" && for f in *; do echo "$f $(stat -c '%i %s %y' "$f") $(sha256sum <"$f")"; done); }
check_rerun() {
	local before id
	before=$(fingerprint)
	id=$(submit_fold refold) || return 1
	wait_jobs "$id" || return 1
	all_completed "$id" 3 || { echo "re-run array $id: $(show_jobs "$id")"; tail_logs "$W/logs/refold_*"; return 1; }
	[ "$before" = "$(fingerprint)" ] || { echo "the re-run rewrote outputs that were complete"; return 1; }
	check_split refold "$id" skipped
}
if why=$(check_rerun); then pass "fold re-run array: COMPLETED, every complete output skipped and left untouched"; else failed "fold re-run" "$why"; fi

# ---------------------------------------------------------------------------
# jobs 3 and 4: a staged change and a staged timeline
# (examples/slurm/stage.sbatch: a 3-task scan array, the fit, a 3-task map
# array and the finish, chained with afterok) must equal a single-machine
# run of the same command bit for bit.
stage_job() { # command out scenes opts stage sbatch-args...: prints the job id
	COMMAND=$1 OUT=$2 SCENES=$3 OPTS=$4 STAGE=$5 BANDFOLD=$BF \
		submit -J "bf-$1-$5" -o "$W/logs/$1-$5_%A_%a.out" "${@:6}" "$EX/stage.sbatch"
}
check_staged() { # command summary opts scene... : then the rasters to compare on stdin
	local command=$1 summary=$2 opts=$3 scan fit map fin id f
	shift 3
	local out=$W/staged-$command single=$W/single-$command
	scan=$(stage_job "$command" "$out" "$*" "$opts" scan --array=0-2) || return 1
	fit=$(stage_job "$command" "$out" "$*" "$opts" fit --dependency=afterok:"$scan") || return 1
	map=$(stage_job "$command" "$out" "$*" "$opts" map --array=0-2 --dependency=afterok:"$fit") || return 1
	fin=$(stage_job "$command" "$out" "$*" "$opts" finish --dependency=afterok:"$map") || return 1
	# shellcheck disable=SC2086 # opts is a list of options
	"$BF" --quiet "$command" "$@" $opts --out "$single" || { echo "single-machine $command failed"; return 1; }
	wait_jobs "$scan" "$fit" "$map" "$fin" || return 1
	for id in "$scan:3" "$fit:1" "$map:3" "$fin:1"; do
		all_completed "${id%:*}" "${id#*:}" || { echo "job ${id%:*}: $(show_jobs "${id%:*}")"; tail_logs "$W/logs/$command-*"; return 1; }
	done
	while read -r f; do
		same_image "$out/$f" "$single/$f" || return 1
	done
	[ "$(jq -S 'del(.outputs)' "$out/$summary")" = "$(jq -S 'del(.outputs)' "$single/$summary")" ] ||
		{ echo "$summary differs from the single run's"; return 1; }
}
if why=$(printf '%s\n' change.tif magnitude.tif | check_staged change summary.json "--tile 128" "$W/scenes/scene-1.tif" "$W/scenes/scene-2.tif"); then
	pass "staged change on Slurm (scan array, fit, map array, finish): change.tif, magnitude.tif and summary.json equal the single run's"
else
	failed "staged change" "$why"
fi
if why=$(printf '%s\n' steps.tif first-change.tif max-magnitude.tif | check_staged timeline timeline.json "--tile 128 --dates 2021,2022,2023" \
	"$W/scenes/scene-1.tif" "$W/scenes/scene-2.tif" "$W/scenes/scene-3.tif"); then
	pass "staged timeline on Slurm (scan array, fit, map array, finish): steps.tif, first-change.tif, max-magnitude.tif and timeline.json equal the single run's"
else
	failed "staged timeline" "$why"
fi

exit 0
