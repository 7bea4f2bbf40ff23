# The speed benchmark (tools/bench.c, tools/bench_numpy.py): built with the tests, never run as
# one (timings on shared machines are not pass/fail). Run: coexist-bench [--quick] [--json F].
add_executable(coexist-bench ${CMAKE_SOURCE_DIR}/tools/bench.c)
target_link_libraries(coexist-bench PRIVATE coexist_core)
target_include_directories(coexist-bench PRIVATE ${CMAKE_SOURCE_DIR}/src)
target_compile_options(coexist-bench PRIVATE ${CX_WARNINGS})
target_compile_definitions(coexist-bench PRIVATE CX_SOURCE_DIR="${CMAKE_SOURCE_DIR}")

# It runs and writes a valid JSON report (no figure judged: timings are not pass/fail).
add_test(NAME bench_report
    COMMAND ${CX_PYTHON} ${CMAKE_CURRENT_SOURCE_DIR}/bench_check.py $<TARGET_FILE:coexist-bench>
        ${CMAKE_CURRENT_BINARY_DIR}
    WORKING_DIRECTORY ${CMAKE_CURRENT_BINARY_DIR})
set_tests_properties(bench_report PROPERTIES LABELS "unit" TIMEOUT 300)
