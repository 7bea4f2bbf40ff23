#!/bin/bash
# A sweep longer than the time limit: SLURM signals the job before the limit, the run stops
# handing out work, lets running cells finish within the grace period, checkpoints and exits
# with status 3; this script then requeues the job, which continues from the checkpoint, until
# every cell is done. Submit once:   sbatch jobs/slurm-long.sh
# A requeued job waits about two minutes before it starts again (SLURM's own delay).
# Lines to change are marked EDIT.
#SBATCH --job-name=rings-and-flow-long
#SBATCH --nodes=1                      # EDIT: nodes
#SBATCH --ntasks-per-node=16           # EDIT: MPI ranks per node
#SBATCH --cpus-per-task=1
#SBATCH --mem-per-cpu=512M             # EDIT: `coexist check` prints the memory per cell
#SBATCH --time=04:00:00                # EDIT: time limit of each run
##SBATCH --partition=compute           # EDIT: remove one '#' to pick a partition
# The signal comes loosely (it was seen up to a minute early), so ask for it well before the
# limit: GRACE seconds for running cells plus time to write the checkpoint.
#SBATCH --signal=B:USR1@180            # EDIT: seconds before the limit
#SBATCH --requeue
#SBATCH --open-mode=append             # every run appends to the same log
#SBATCH --output=rings-and-flow-long-%j.log

set -u
SWEEP=jobs/rings-and-flow.yaml         # EDIT: the sweep file
CUBE=rings-and-flow.h5                 # EDIT: the output cube
COEXIST=${COEXIST:-coexist}            # EDIT: path to the coexist program
GRACE=60                               # EDIT: seconds running cells may take after the signal
export OPENBLAS_NUM_THREADS=1

echo "coexist job ${SLURM_JOB_ID:-?} restart ${SLURM_RESTART_COUNT:-0}"
"$COEXIST" check "$SWEEP" || exit $?

# B:USR1 goes to this shell only; it passes the signal on to srun, which passes it to the
# ranks. `wait` returns early when a trapped signal arrives, hence the loop.
srun --mpi=pmix "$COEXIST" run "$SWEEP" -o "$CUBE" --grace "$GRACE" &
pid=$!
trap 'kill -USR1 $pid 2>/dev/null' USR1
trap 'kill -TERM $pid 2>/dev/null' TERM
wait $pid; status=$?
while kill -0 $pid 2>/dev/null; do wait $pid; status=$?; done
if [ "$status" -eq 3 ]; then
    echo "coexist: stopped before done; requeueing job $SLURM_JOB_ID"
    scontrol requeue "$SLURM_JOB_ID"
    exit 0
fi
exit "$status"
