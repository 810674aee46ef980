#!/bin/bash
# Submits the job array (array.sbatch) and the merge (merge.sbatch) to run once every task of the
# array has succeeded. If a task fails (a time limit, say), the merge is cancelled rather than left
# pending: rerun the failed tasks (sbatch --array=K,... array.sbatch; they resume), then
# `sbatch merge.sbatch`.
set -euo pipefail
cd "$(dirname "$0")"
array_job=$(sbatch --parsable array.sbatch)
array_job=${array_job%%;*}   # --parsable prints "jobid" or "jobid;cluster"
echo "job array: ${array_job}"
sbatch --dependency=afterok:"${array_job}" --kill-on-invalid-dep=yes merge.sbatch
