#!/usr/bin/env bash
# Measure an ensemble of simulated skies as a SLURM array job, one shard per task, then merge.
#
#   sbatch --array=0-15 examples/slurm_ensemble.sh recipe.toml mask.fits ens_fiducial
#   # when all tasks are done:
#   planisphere merge ens_fiducial
#
# Each task reads its shard from SLURM_ARRAY_TASK_ID / SLURM_ARRAY_TASK_COUNT; a task that is
# killed or preempted can simply be resubmitted: finished maps are skipped.
#SBATCH --job-name=planisphere-ensemble
#SBATCH --cpus-per-task=4
#SBATCH --time=04:00:00
#SBATCH --output=planisphere-%A_%a.log
set -euo pipefail
recipe=${1:?usage: slurm_ensemble.sh RECIPE.toml MASK.fits OUTPUT_DIR}
mask=${2:?usage: slurm_ensemble.sh RECIPE.toml MASK.fits OUTPUT_DIR}
out=${3:?usage: slurm_ensemble.sh RECIPE.toml MASK.fits OUTPUT_DIR}
export RAYON_NUM_THREADS=${SLURM_CPUS_PER_TASK:-1}
planisphere ensemble --simulate "$recipe" --mask "$mask" --output-dir "$out" --quiet
