#!/usr/bin/env bash
# One array task per sweep job: task i runs job i of the sweep directory.
# Written from Slurm's documentation of sbatch and job arrays
# (https://slurm.schedmd.com/sbatch.html, https://slurm.schedmd.com/job_array.html):
# --array gives the task indices, Slurm sets SLURM_ARRAY_TASK_ID in each
# task, %A and %a in --output are the array's job ID and the task index.
#
# Plan first, on a file system every node sees, then submit with as many
# tasks as the plan has jobs (pipit sweep plan prints "jobs 0..N-1"):
#
#   pipit sweep plan --data /shared/yard/manifest.csv --profile m4-half \
#       --grid yard.grid --out /shared/yard-sweep
#   sbatch --array=0-11%4 examples/sweep/slurm-array.sh /shared/yard-sweep
#   # after the array has finished:
#   pipit sweep report /shared/yard-sweep
#
# A task that is requeued or resubmitted finds its result and exits at
# once; a task killed half-way leaves no result and is simply run again.
#SBATCH --job-name=pipit-sweep
#SBATCH --ntasks=1
#SBATCH --cpus-per-task=2
#SBATCH --mem=2G
#SBATCH --time=01:00:00
#SBATCH --output=pipit-sweep-%A_%a.log
set -euo pipefail
dir=${1:?usage: sbatch --array=0-N slurm-array.sh SWEEP_DIR}
# The feature cache is per node; point PIPIT_CACHE at shared storage to share it.
exec "${PIPIT:-pipit}" sweep run "$dir" --index-from-env SLURM_ARRAY_TASK_ID --cache "${PIPIT_CACHE:-${TMPDIR:-/tmp}/pipit-features}"
