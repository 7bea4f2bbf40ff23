# libFuzzer targets (tests/fuzz/): only with -DCX_FUZZ=ON and clang, in a build of their own
# whose C flags carry -fsanitize=fuzzer-no-link,address,undefined so the library is
# instrumented too (tools/fuzz.sh configures such a build). Seed corpora: tests/fuzz/corpus/.
option(CX_FUZZ "Build the libFuzzer targets (clang only)" OFF)
if (CX_FUZZ)
    if (NOT CMAKE_C_COMPILER_ID MATCHES "Clang")
        message(FATAL_ERROR "CX_FUZZ=ON needs clang (CC=clang)")
    endif ()
    # The targets link their own copy of the library. src/reservoir/tanh.c selects its AVX2 and
    # AVX-512 kernels with GCC's `#pragma GCC target`, which clang ignores; in this copy (a
    # property set here reaches only targets of this directory) that file is compiled with the
    # instruction sets named on the command line instead. The fuzz build therefore needs a CPU
    # with AVX-512F, as the project's machines have.
    set(fuzz_sources ${CX_LIB_SOURCES})
    set_source_files_properties(${CMAKE_SOURCE_DIR}/src/reservoir/tanh.c PROPERTIES
        COMPILE_OPTIONS "-mavx2;-mfma;-mavx512f")
    add_library(cx_fuzz_core STATIC EXCLUDE_FROM_ALL ${fuzz_sources})
    target_include_directories(cx_fuzz_core PUBLIC
        $<TARGET_PROPERTY:coexist_core,INTERFACE_INCLUDE_DIRECTORIES>
        PRIVATE ${CMAKE_SOURCE_DIR}/src)
    target_compile_definitions(cx_fuzz_core PRIVATE
        $<TARGET_PROPERTY:coexist_core,COMPILE_DEFINITIONS>)
    target_link_libraries(cx_fuzz_core PUBLIC
        $<TARGET_PROPERTY:coexist_core,INTERFACE_LINK_LIBRARIES>)
    foreach (target study journal cube)
        add_executable(fuzz_${target} ${CMAKE_CURRENT_SOURCE_DIR}/fuzz/fuzz_${target}.c)
        target_link_libraries(fuzz_${target} PRIVATE cx_fuzz_core)
        target_compile_options(fuzz_${target} PRIVATE ${CX_WARNINGS} -fsanitize=fuzzer,address,undefined)
        target_link_options(fuzz_${target} PRIVATE -fsanitize=fuzzer,address,undefined)
        # The smoke run: a few thousand executions from the seed corpus (label fuzz).
        # New inputs go to a corpus directory in the build tree, never into the sources.
        set(out ${CMAKE_CURRENT_BINARY_DIR}/fuzz_${target}.out)
        set(maxlen 8192)
        if (target STREQUAL "cube")
            set(maxlen 65536) # a whole HDF5 file: the seed is about 44 KB
        endif ()
        add_test(NAME fuzz_${target}_smoke
            COMMAND sh -c "mkdir -p '${out}/corpus' && exec '$<TARGET_FILE:fuzz_${target}>' -runs=3000 -seed=2385 -max_len=${maxlen} -artifact_prefix='${out}/' '${out}/corpus' '${CMAKE_CURRENT_SOURCE_DIR}/fuzz/corpus/${target}'")
        set_tests_properties(fuzz_${target}_smoke PROPERTIES LABELS "fuzz" TIMEOUT 120
            ENVIRONMENT "ASAN_OPTIONS=detect_leaks=1:fast_unwind_on_malloc=0;LSAN_OPTIONS=suppressions=${CMAKE_CURRENT_SOURCE_DIR}/fuzz/hdf5.supp:print_suppressions=0;UBSAN_OPTIONS=halt_on_error=1:print_stacktrace=1")
    endforeach ()
endif ()
