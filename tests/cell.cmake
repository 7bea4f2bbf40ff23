cx_add_test(NAME test_cell SOURCES test_cell.c LABELS unit TIMEOUT 300)

# coexist cell --dump, read back with h5py/numpy (Debian's python3 packages): the dumped matrices
# reproduce the target spectral radius and the first closed-loop output.
add_test(NAME test_cell_dump
    COMMAND ${CX_PYTHON} ${CMAKE_CURRENT_SOURCE_DIR}/check_dump.py $<TARGET_FILE:coexist>
        ${CMAKE_SOURCE_DIR}/jobs/demo-window.yaml
    WORKING_DIRECTORY ${CMAKE_CURRENT_BINARY_DIR})
set_tests_properties(test_cell_dump PROPERTIES LABELS "unit" TIMEOUT 300
    ENVIRONMENT "OPENBLAS_NUM_THREADS=1")

# The command line: --help on every command, exit codes for bad input.
add_test(NAME test_cli
    COMMAND sh ${CMAKE_CURRENT_SOURCE_DIR}/check_cli.sh $<TARGET_FILE:coexist> ${CMAKE_SOURCE_DIR}
    WORKING_DIRECTORY ${CMAKE_CURRENT_BINARY_DIR})
set_tests_properties(test_cli PROPERTIES LABELS "unit" TIMEOUT 300
    ENVIRONMENT "OPENBLAS_NUM_THREADS=1")

# The README's demo command, with the build under test.
add_test(NAME demo_script
    COMMAND sh ${CMAKE_CURRENT_SOURCE_DIR}/check_demo.sh ${CMAKE_SOURCE_DIR} ${CMAKE_BINARY_DIR}
    WORKING_DIRECTORY ${CMAKE_CURRENT_BINARY_DIR})
set_tests_properties(demo_script PROPERTIES LABELS "unit" TIMEOUT 300)
