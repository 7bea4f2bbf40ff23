cx_add_test(NAME test_task SOURCES test_task.c LABELS unit TIMEOUT 120)
