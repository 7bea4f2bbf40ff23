cx_add_test(NAME test_reservoir SOURCES test_reservoir.c LABELS unit)
