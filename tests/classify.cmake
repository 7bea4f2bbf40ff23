# Outcome classification: src/classify/ checked on signals with known answers.
cx_add_test(NAME test_classify SOURCES test_classify.c LABELS unit)
