#!/bin/bash
# Submits the unit array of study @STUDY@, then the gathering job to run after it (written by
# `cinegauge split`). Prints the two job ids.
set -euo pipefail
cd "$(dirname "$0")"
mkdir -p "@OUT@/slurm"
array=$(sbatch --parsable array.sbatch)
array=${array%%;*}
gather=$(sbatch --parsable --dependency=afterany:"$array" gather.sbatch)
echo "$array ${gather%%;*}"
