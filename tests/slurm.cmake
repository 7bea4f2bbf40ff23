# SLURM: batch scripts from `coexist jobs` submitted to a real one-node SLURM started by
# tools/slurm-cluster.sh (a 2-rank srun job, a 4-task array with a merge job, a job that is
# interrupted and requeues itself, a job with an invalid sweep file). Needs root to start the
# daemons; skipped (77) otherwise.
add_test(NAME slurm_jobs
    COMMAND ${CX_PYTHON} ${CMAKE_CURRENT_SOURCE_DIR}/slurm_cli.py cluster ${CMAKE_CURRENT_BINARY_DIR}/slurm_jobs
    WORKING_DIRECTORY ${CMAKE_CURRENT_BINARY_DIR})
set_tests_properties(slurm_jobs PROPERTIES LABELS "slurm" TIMEOUT 600 SKIP_RETURN_CODE 77
    ENVIRONMENT "${CX_MPI_ENV};CX_SOURCE_DIR=${CMAKE_SOURCE_DIR};CX_BINARY=$<TARGET_FILE:coexist>;CX_MPIEXEC=${CX_MPIEXEC}")

# The shard assignment (C) and the shard, merge, status and grace paths without SLURM (mpirun).
cx_add_test(NAME test_shards SOURCES test_shards.c LABELS unit)
add_test(NAME shards_local
    COMMAND ${CX_PYTHON} ${CMAKE_CURRENT_SOURCE_DIR}/slurm_cli.py local ${CMAKE_CURRENT_BINARY_DIR}/shards_local
    WORKING_DIRECTORY ${CMAKE_CURRENT_BINARY_DIR})
set_tests_properties(shards_local PROPERTIES LABELS "mpi" TIMEOUT 300
    ENVIRONMENT "${CX_MPI_ENV};CX_SOURCE_DIR=${CMAKE_SOURCE_DIR};CX_BINARY=$<TARGET_FILE:coexist>;CX_MPIEXEC=${CX_MPIEXEC}")
