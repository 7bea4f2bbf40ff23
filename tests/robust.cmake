# Robustness: the bad-input catalogue (tests/bad/catalogue.txt, driven by robust_bad.py against
# a real cube), the kill-and-resume torture (robust_torture.py, under mpirun), and the fuzz
# targets (tests/fuzz.cmake, only with -DCX_FUZZ=ON and clang).
add_test(NAME robust_bad
    COMMAND ${CX_PYTHON} ${CMAKE_CURRENT_SOURCE_DIR}/robust_bad.py
            ${CMAKE_CURRENT_BINARY_DIR}/robust_bad
    WORKING_DIRECTORY ${CMAKE_CURRENT_BINARY_DIR})
set_tests_properties(robust_bad PROPERTIES LABELS "unit" TIMEOUT 300
    ENVIRONMENT "OPENBLAS_NUM_THREADS=1;CX_SOURCE_DIR=${CMAKE_SOURCE_DIR};CX_BINARY=$<TARGET_FILE:coexist>")

# Kill-and-resume torture: 20 seeded trials of SIGKILL to one rank of a 3-rank run, then resume.
add_test(NAME robust_torture
    COMMAND ${CX_PYTHON} ${CMAKE_CURRENT_SOURCE_DIR}/robust_torture.py
            ${CMAKE_CURRENT_BINARY_DIR}/robust_torture
    WORKING_DIRECTORY ${CMAKE_CURRENT_BINARY_DIR})
set_tests_properties(robust_torture PROPERTIES LABELS "mpi" TIMEOUT 300
    ENVIRONMENT "${CX_MPI_ENV};CX_SOURCE_DIR=${CMAKE_SOURCE_DIR};CX_BINARY=$<TARGET_FILE:coexist>;CX_MPIEXEC=${CX_MPIEXEC}")

# Security basics of coexist run: no commands from sweep files, no writes through planted
# symlinks, no overwrite without --fresh, the user's umask.
add_test(NAME robust_security
    COMMAND ${CX_PYTHON} ${CMAKE_CURRENT_SOURCE_DIR}/robust_security.py
            ${CMAKE_CURRENT_BINARY_DIR}/robust_security
    WORKING_DIRECTORY ${CMAKE_CURRENT_BINARY_DIR})
set_tests_properties(robust_security PROPERTIES LABELS "unit" TIMEOUT 300
    ENVIRONMENT "OPENBLAS_NUM_THREADS=1;CX_SOURCE_DIR=${CMAKE_SOURCE_DIR};CX_BINARY=$<TARGET_FILE:coexist>")

# Fault injection (tests/robust_faults.py) needs a build of its own:
#   cmake -S . -B BUILD -DCX_SANITIZE=ON -DCX_WERROR=OFF -DCMAKE_C_FLAGS=-DCX_FAULT_INJECTION
# and is registered only there (label fault).
if (CMAKE_C_FLAGS MATCHES "CX_FAULT_INJECTION")
    add_test(NAME robust_faults
        COMMAND ${CX_PYTHON} ${CMAKE_CURRENT_SOURCE_DIR}/robust_faults.py
                ${CMAKE_CURRENT_BINARY_DIR}/robust_faults
        WORKING_DIRECTORY ${CMAKE_CURRENT_BINARY_DIR})
    set_tests_properties(robust_faults PROPERTIES LABELS "fault" TIMEOUT 900
        ENVIRONMENT "OPENBLAS_NUM_THREADS=1;CX_SOURCE_DIR=${CMAKE_SOURCE_DIR};CX_BINARY=$<TARGET_FILE:coexist>")
endif ()

# A full disk: mounts small tmpfs file systems, so it needs root (label root; skipped, exit 77,
# otherwise).
add_test(NAME robust_diskfull
    COMMAND ${CX_PYTHON} ${CMAKE_CURRENT_SOURCE_DIR}/robust_diskfull.py
            ${CMAKE_CURRENT_BINARY_DIR}/robust_diskfull
    WORKING_DIRECTORY ${CMAKE_CURRENT_BINARY_DIR})
set_tests_properties(robust_diskfull PROPERTIES LABELS "root" TIMEOUT 300 SKIP_RETURN_CODE 77
    ENVIRONMENT "OPENBLAS_NUM_THREADS=1;CX_SOURCE_DIR=${CMAKE_SOURCE_DIR};CX_BINARY=$<TARGET_FILE:coexist>")
