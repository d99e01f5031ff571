#!/bin/bash
# Submit a staged change: a scan array, the fit, a map array and the finish,
# each running once the one before succeeded.
#
#   BEFORE=/shared/2023.tif AFTER=/shared/2024.tif OUT=/shared/change-2024 \
#     ARRAY=0-15 bash examples/slurm/submit-change.sh [sbatch options for all]
#
# Prints the four job ids; the change folder is $OUT once the last is done.
set -euo pipefail
here=$(cd "$(dirname "$0")" && pwd)
: "${BEFORE:?}" "${AFTER:?}" "${OUT:?}"
export BEFORE AFTER OUT OPTS=${OPTS:-}
array=${ARRAY:-0-3}
mkdir -p logs
job() { # stage sbatch-args...
	local id
	id=$(STAGE=$1 sbatch --parsable --export=ALL,STAGE="$1" "${@:2}" "$here/change-stage.sbatch")
	echo "${id%%;*}"
}
scan=$(job scan --array="$array" "$@")
fit=$(job fit --dependency=afterok:"$scan" --kill-on-invalid-dep=yes "$@")
map=$(job map --array="$array" --dependency=afterok:"$fit" --kill-on-invalid-dep=yes "$@")
finish=$(job finish --dependency=afterok:"$map" --kill-on-invalid-dep=yes "$@")
echo "scan array: job $scan"
echo "fit:        job $fit"
echo "map array:  job $map"
echo "finish:     job $finish"
