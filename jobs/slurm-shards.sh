#!/bin/bash
# A job array: each task computes one shard (a fixed, cost-balanced share of the cells) and
# writes only journals; a merge job that starts after the array builds the cube. Submit both
# from the directory that should hold the cube:
#
#   jid=$(sbatch --parsable jobs/slurm-shards.sh)
#   sbatch --dependency=afterany:$jid --output=merge-%j.log \
#          --wrap "coexist merge jobs/rings-and-flow.yaml -o rings-and-flow.h5"
#
# afterany (not afterok) so that the merge runs, and reports which shards are incomplete,
# even when a task failed: afterok would leave it pending forever. When cells are missing
# after the merge, a plain run (jobs/slurm-one-job.sh) computes just those: it merges what is
# there and continues. A single task resubmitted alone (--array=3) is an array of one, which
# is not a shard: pass the shard by hand instead (--shard 3/8 on the `coexist run` line).
# Lines to change are marked EDIT.
#SBATCH --job-name=rings-and-flow-shards
#SBATCH --array=0-7                    # EDIT: number of shards (0-7 = 8 shards)
#SBATCH --nodes=1
#SBATCH --ntasks-per-node=4            # EDIT: MPI ranks per shard
#SBATCH --cpus-per-task=1
#SBATCH --mem-per-cpu=512M             # EDIT: `coexist check` prints the memory per cell
#SBATCH --time=00:30:00                # EDIT: time limit of each task
##SBATCH --partition=compute           # EDIT: remove one '#' to pick a partition
#SBATCH --output=rings-and-flow-%A_%a.log

set -u
SWEEP=jobs/rings-and-flow.yaml         # EDIT: the sweep file
CUBE=rings-and-flow.h5                 # EDIT: the cube the merge job builds
COEXIST=${COEXIST:-coexist}            # EDIT: path to the coexist program
export OPENBLAS_NUM_THREADS=1

"$COEXIST" check "$SWEEP" || exit $?

# Without --shard, `coexist run` takes its shard from SLURM_ARRAY_TASK_ID, _MIN and _COUNT
# (an array of more than one task). Which cells a shard holds depends on the number of shards.
srun --mpi=pmix "$COEXIST" run "$SWEEP" -o "$CUBE"
