# Random streams: src/rng/rng.c checked against the PCG reference header (libpcg-cpp-dev).
add_executable(pcg_ref ${CMAKE_CURRENT_SOURCE_DIR}/pcg_ref.cpp)
set_target_properties(pcg_ref PROPERTIES CXX_STANDARD 11 CXX_STANDARD_REQUIRED ON)
cx_add_test(NAME test_rng SOURCES test_rng.c LABELS unit ARGS $<TARGET_FILE:pcg_ref>)
add_dependencies(test_rng pcg_ref)
