#!/usr/bin/env bash
# Render a preset as a Slurm job array: one shard per array task.
#
#   jid=$(sbatch --parsable examples/slurm/generate-array.sh)
#   sbatch --dependency=afterok:$jid examples/slurm/merge.sh
#
# trueset reads SLURM_ARRAY_TASK_ID, SLURM_ARRAY_TASK_COUNT and
# SLURM_ARRAY_TASK_MIN itself, so the array must be contiguous (0-7 or 1-8).
# PRESET, COUNT, SEED and OUT may be overridden from the environment.
#SBATCH --job-name=trueset-shards
#SBATCH --array=0-7
#SBATCH --cpus-per-task=2
#SBATCH --mem=512M
#SBATCH --time=00:30:00
#SBATCH --output=trueset-%A_%a.log
set -euo pipefail

PRESET=${PRESET:-bin-labels}
COUNT=${COUNT:-80000}
SEED=${SEED:-7}
OUT=${OUT:-shards}

trueset generate --preset "$PRESET" --count "$COUNT" --seed "$SEED" \
  --workers "${SLURM_CPUS_PER_TASK:-2}" --quiet \
  --out "$OUT/part-$(printf %02d "$SLURM_ARRAY_TASK_ID")"
