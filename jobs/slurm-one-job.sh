#!/bin/bash
# One MPI job: every rank of one allocation works on the same sweep and writes one cube.
# Submit from the directory that should hold the cube:   sbatch jobs/slurm-one-job.sh
# `coexist jobs SWEEP -o my-job.sh` writes a script like this one with the resources sized
# from the sweep's cost estimate; this copy is for reading and editing by hand.
# Lines to change are marked EDIT.
#SBATCH --job-name=rings-and-flow      # EDIT: a name for squeue
#SBATCH --nodes=2                      # EDIT: nodes
#SBATCH --ntasks-per-node=16           # EDIT: MPI ranks per node (one per core)
#SBATCH --cpus-per-task=1
#SBATCH --mem-per-cpu=512M             # EDIT: `coexist check` prints the memory per cell
#SBATCH --time=02:00:00                # EDIT: time limit
##SBATCH --partition=compute           # EDIT: remove one '#' to pick a partition
#SBATCH --output=rings-and-flow-%j.log

set -u
SWEEP=jobs/rings-and-flow.yaml         # EDIT: the sweep file
CUBE=rings-and-flow.h5                 # EDIT: the output cube
COEXIST=${COEXIST:-coexist}            # EDIT: path to the coexist program
export OPENBLAS_NUM_THREADS=1          # the ranks fill the cores; one BLAS thread each

# A bad sweep file fails here, with the validation message at the top of the log.
"$COEXIST" check "$SWEEP" || exit $?

# Debian's Open MPI starts under SLURM through PMIx (--mpi=pmi2 and --mpi=none fail).
# Resubmitting the same script continues where an interrupted run stopped.
srun --mpi=pmix "$COEXIST" run "$SWEEP" -o "$CUBE"
