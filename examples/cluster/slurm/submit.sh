#!/bin/bash
# Queue the sharded trust study and its gather step on Slurm.
set -euo pipefail
cd "$(dirname "$0")"
jid=$(sbatch --parsable study.sbatch)
sbatch --dependency=afterok:"${jid}" gather.sbatch
