#!/bin/bash
# Submit the learn array and the merge job that runs after it.
#
#   SCENE=/vsis3/my-bucket/scenes/scene.tif RUN=/shared/me/run-01 ARRAY=0-31 \
#     bash examples/slurm/submit-learn.sh [sbatch options for both jobs]
#
# ARRAY overrides the array range of learn-array.sbatch (one contiguous range;
# a % throttle is fine, e.g. 0-31%8). The options given here, for example
# --partition=short or --account=proj, go to both jobs and override their
# #SBATCH lines; give the array range through ARRAY, not --array, or the merge
# would become an array too.
#
# Prints the two job ids. Follow them with "squeue -u $USER" and, once done,
# "sacct -j <id>"; the basis is $RUN/basis.json.
set -euo pipefail
here=$(cd "$(dirname "$0")" && pwd)
: "${SCENE:?set SCENE to the image to learn from}"
export SCENE RUN=${RUN:-$PWD/bandfold-run}
mkdir -p logs "$RUN/parts" # Slurm does not create the folder of --output

array=()
[ -z "${ARRAY:-}" ] || array=(--array="$ARRAY")
learn=$(sbatch --parsable "${array[@]}" "$@" "$here/learn-array.sbatch")
learn=${learn%%;*} # "id;cluster" on multi-cluster sites
merge=$(sbatch --parsable "$@" --dependency=afterok:"$learn" --kill-on-invalid-dep=yes "$here/merge.sbatch")
echo "learn array: job $learn"
echo "merge:       job ${merge%%;*} (runs once every task of $learn succeeded)"
