# The fast paths of the stepping kernels: vector tanh error, early stop and fast-path labels.
cx_add_test(NAME test_speed SOURCES test_speed.c LABELS unit TIMEOUT 300)
