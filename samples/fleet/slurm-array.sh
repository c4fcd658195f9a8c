#!/bin/sh
# slurm-array.sh: the fleet of fleet.sh as a Slurm job array, one task per
# arm. Submit from the fleet's parent folder:
#   n=$(ls -d fleet/*/ | wc -l)
#   jid=$(sbatch --parsable --array=0-$((n - 1)) samples/fleet/slurm-array.sh fleet out)
#   sbatch --dependency=afterany:$jid --wrap "python3 samples/fleet/summary.py out > out/summary.csv"
# afterany: the summary runs whether or not some arms failed; each task
# records its arm's status and never fails the array itself.
#SBATCH --job-name=twistfit-fleet
#SBATCH --cpus-per-task=2
#SBATCH --time=00:30:00
#SBATCH --output=slurm-%A_%a.out
set -u
fleet=$1
out=$2
here=${SLURM_SUBMIT_DIR:-.}/samples/fleet
arm=$(ls -d "$fleet"/*/ | sed -n "$((SLURM_ARRAY_TASK_ID + 1))p")
[ -n "$arm" ] || { echo "no arm for task $SLURM_ARRAY_TASK_ID" >&2; exit 1; }
TWISTFIT_OPTIONS="--threads ${SLURM_CPUS_PER_TASK:-1} ${TWISTFIT_OPTIONS:-}" \
  sh "$here/calibrate-arm.sh" "$arm" "$out"
