# Sweep engine: unit tests of the journal, records and schedule (C), and end-to-end tests that
# drive the coexist binary under mpirun and read cubes with h5py and xarray (Python).
cx_add_test(NAME test_engine SOURCES test_engine.c LABELS unit)

foreach (scenario ranks reuse readers crash signal refusals)
    add_test(NAME engine_${scenario}
        COMMAND ${CX_PYTHON} ${CMAKE_CURRENT_SOURCE_DIR}/engine_cli.py ${scenario}
                ${CMAKE_CURRENT_BINARY_DIR}/engine_${scenario}
        WORKING_DIRECTORY ${CMAKE_CURRENT_BINARY_DIR})
    set_tests_properties(engine_${scenario} PROPERTIES LABELS "mpi" TIMEOUT 300
        ENVIRONMENT "${CX_MPI_ENV};CX_SOURCE_DIR=${CMAKE_SOURCE_DIR};CX_BINARY=$<TARGET_FILE:coexist>;CX_MPIEXEC=${CX_MPIEXEC}")
endforeach ()

# Benchmark of the coordinator (not a test): cmake --build BUILD --target bench_dispatch, then
# tools/bench_engine BUILD.
add_executable(bench_dispatch EXCLUDE_FROM_ALL ${CMAKE_SOURCE_DIR}/tools/bench_dispatch.c)
target_link_libraries(bench_dispatch PRIVATE coexist_core)
target_compile_options(bench_dispatch PRIVATE ${CX_WARNINGS})
