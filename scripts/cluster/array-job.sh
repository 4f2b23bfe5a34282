#!/usr/bin/env bash
# coxa batch as a Slurm array job: one array task per shard of the manifest.
#
#   sbatch --array=1-N [sbatch options] scripts/cluster/array-job.sh MANIFEST.csv OUT [coxa batch options]
#
# Task K of N runs `coxa batch MANIFEST --out OUT --shard auto --resume`: --shard auto turns
# SLURM_ARRAY_TASK_ID / SLURM_ARRAY_TASK_COUNT (or MIN/MAX) into shard K/N, so the N tasks
# together cover every case exactly once; --resume makes a requeued or repeated task skip the
# cases it already finished. Every task writes its cases into OUT/<case>/ and its own
# OUT/cohort-shard-K-of-N.csv; after the whole array has ended, merge with
#
#   coxa batch MANIFEST.csv --summarize OUT
#
# (e.g. from a job submitted with --dependency=afterany:<array job id>).
#
# Environment:
#   COXA       command that runs coxa (default: `coxa` on PATH, else
#              `node $SLURM_SUBMIT_DIR/dist/cli/main.js` when run from a coxa checkout)
#   COXA_JOBS  cases at a time inside one task (default: 1; give the task as many CPUs)
#
# The task's exit code is coxa batch's: 0 all its cases pass/review, 3 some case failed its
# quality gates or could not be completed (see the cohort file), 2 bad manifest or options.
#SBATCH --job-name=coxa-batch
#SBATCH --cpus-per-task=1
#SBATCH --output=coxa-batch-%A_%a.out
set -euo pipefail

if [ "$#" -lt 2 ]; then
  echo "usage: sbatch --array=1-N $0 MANIFEST.csv OUT [coxa batch options]" >&2
  exit 2
fi
manifest=$1
out=$2
shift 2

if [ -z "${SLURM_ARRAY_TASK_ID:-}" ]; then
  echo "array-job.sh: SLURM_ARRAY_TASK_ID is not set; submit with sbatch --array=1-N" >&2
  exit 2
fi

if [ -n "${COXA:-}" ]; then
  read -r -a coxa_cmd <<<"$COXA"
elif command -v coxa >/dev/null 2>&1; then
  coxa_cmd=(coxa)
elif [ -f "${SLURM_SUBMIT_DIR:-.}/dist/cli/main.js" ]; then
  coxa_cmd=(node "${SLURM_SUBMIT_DIR:-.}/dist/cli/main.js")
else
  echo "array-job.sh: cannot find coxa; set COXA (e.g. COXA=\"node /path/to/coxa/dist/cli/main.js\")" >&2
  exit 2
fi

echo "coxa array task ${SLURM_ARRAY_TASK_ID} (job ${SLURM_ARRAY_JOB_ID:-?}, ${SLURM_ARRAY_TASK_COUNT:-?} tasks) on $(hostname)"
exec "${coxa_cmd[@]}" batch "$manifest" --out "$out" --shard auto --resume --jobs "${COXA_JOBS:-1}" --quiet "$@"
