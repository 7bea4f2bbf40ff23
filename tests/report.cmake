# Reports: the Wilson interval and cell classes (C), the interval against scipy, capacity and
# region maps on a synthetic cube written with h5py, SVG well-formedness with xmllint, and an
# exact replay of cells of the demo cube (Python, Debian's numpy/scipy/h5py).
cx_add_test(NAME test_report SOURCES test_report.c LABELS unit)

foreach (scenario wilson synthetic replay)
    add_test(NAME report_${scenario}
        COMMAND ${CX_PYTHON} ${CMAKE_CURRENT_SOURCE_DIR}/report_check.py ${scenario}
                ${CMAKE_CURRENT_BINARY_DIR}/report_${scenario}
        WORKING_DIRECTORY ${CMAKE_CURRENT_BINARY_DIR})
    set_tests_properties(report_${scenario} PROPERTIES LABELS "unit" TIMEOUT 300
        SKIP_RETURN_CODE 77
        ENVIRONMENT "OPENBLAS_NUM_THREADS=1;CX_SOURCE_DIR=${CMAKE_SOURCE_DIR};CX_BINARY=$<TARGET_FILE:coexist>;CX_TEST_REPORT=$<TARGET_FILE:test_report>")
endforeach ()
