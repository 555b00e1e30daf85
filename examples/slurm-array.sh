#!/bin/bash
# Run one tilebench study as a Slurm job array: each array task runs one
# shard (tilebench reads SLURM_ARRAY_TASK_ID and SLURM_ARRAY_TASK_COUNT),
# and a last job merges the shards into one folder whose results.jsonl is
# byte-identical to an unsharded run's.
#
#   sbatch examples/slurm-array.sh            # submits the array
#   # when it has finished:
#   tilebench merge stress-drive stress-drive-shard-*
#
# Re-submitting after a timeout or preemption is safe: --resume keeps every
# finished episode and retries failed ones.
#SBATCH --job-name=tilebench-stress
#SBATCH --array=0-7                 # 8 shards; keep the array contiguous from 0
#SBATCH --cpus-per-task=4
#SBATCH --mem=4G
#SBATCH --time=02:00:00
#SBATCH --output=tilebench-%A_%a.log
set -euo pipefail

STUDY=${STUDY:-examples/study.toml}
OUT=${OUT:-stress-drive}

# Each shard writes its own folder; --workers uses the CPUs Slurm gave us.
tilebench stress --config "$STUDY" \
  --workers "${SLURM_CPUS_PER_TASK:-1}" \
  --out "${OUT}-shard-${SLURM_ARRAY_TASK_ID}" \
  --resume

# To merge automatically, submit a dependent job instead of merging by hand:
#   jid=$(sbatch --parsable examples/slurm-array.sh)
#   sbatch --dependency=afterok:$jid --wrap "tilebench merge $OUT ${OUT}-shard-*"
