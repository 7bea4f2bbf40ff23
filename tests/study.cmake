cx_add_test(NAME test_study SOURCES test_study.c LABELS unit)
