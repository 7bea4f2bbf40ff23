# Networks: topologies, CSR kernels, input matrix and spectral radius (src/net/).
cx_add_test(NAME test_net SOURCES test_net.c LABELS unit TIMEOUT 300)
