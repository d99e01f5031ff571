#!/bin/bash
# Submit a staged change or timeline: a scan array, the fit, a map array and
# the finish, each running once the one before succeeded.
#
#   SCENES="/shared/2023.tif /shared/2024.tif" OUT=/shared/change-2024 \
#     ARRAY=0-15 bash examples/slurm/submit-stages.sh [sbatch options for all]
#   COMMAND=timeline SCENES="/shared/2019.tif /shared/2020.tif /shared/2021.tif" \
#     OUT=/shared/timeline ARRAY=0-15 bash examples/slurm/submit-stages.sh
#
# Prints the four job ids; the output folder is $OUT once the last is done.
set -euo pipefail
here=$(cd "$(dirname "$0")" && pwd)
: "${SCENES:?}" "${OUT:?}"
export COMMAND=${COMMAND:-change} SCENES OUT OPTS=${OPTS:-}
array=${ARRAY:-0-3}
mkdir -p logs
job() { # stage sbatch-args...
	local id
	id=$(sbatch --parsable --job-name="bandfold-$COMMAND-$1" --export=ALL,STAGE="$1" "${@:2}" "$here/stage.sbatch")
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
