#!/usr/bin/env bash
# Join the shards written by generate-array.sh and check the result.
#SBATCH --job-name=trueset-merge
#SBATCH --cpus-per-task=2
#SBATCH --mem=512M
#SBATCH --time=00:30:00
#SBATCH --output=trueset-merge-%j.log
set -euo pipefail

OUT=${OUT:-shards}
DATASET=${DATASET:-dataset}

trueset merge "$OUT"/part-* --out "$DATASET"
trueset verify "$DATASET"
