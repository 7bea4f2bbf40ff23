// coexist tests: prints reference PCG32 streams from the reference C++ implementation
// (M. E. O'Neill, pcg-cpp, Debian package libpcg-cpp-dev, header <pcg_random.hpp>), so that
// test_rng can compare src/rng/rng.c with it output for output.
//
// Usage (all numbers decimal or 0x-hex; outputs are printed one per line in hex):
//   pcg_ref raw   SEED STREAM COUNT        COUNT outputs of pcg32(SEED, STREAM)
//   pcg_ref skip  SEED STREAM K COUNT      discard(K), then COUNT outputs
//   pcg_ref bound SEED STREAM BOUND COUNT  COUNT draws g(BOUND)
//   pcg_ref state SEED STREAM              increment and state after seeding
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <sstream>
#include <string>

#include <pcg_random.hpp>

static unsigned long long num(const char *s)
{
    return std::strtoull(s, nullptr, 0);
}

int main(int argc, char **argv)
{
    if (argc < 4) {
        std::fprintf(stderr, "usage: pcg_ref raw|skip|bound|state SEED STREAM ...\n");
        return 2;
    }
    const char *mode = argv[1];
    pcg32 g(num(argv[2]), num(argv[3]));
    if (std::strcmp(mode, "state") == 0) {
        std::ostringstream os;
        os << g;
        unsigned long long mult = 0, inc = 0, state = 0;
        std::istringstream is(os.str());
        is >> mult >> inc >> state;
        std::printf("%llx %llx\n", inc, state);
        return 0;
    }
    if (std::strcmp(mode, "raw") == 0 && argc == 5) {
        unsigned long long n = num(argv[4]);
        for (unsigned long long i = 0; i < n; i++)
            std::printf("%x\n", (unsigned)g());
        return 0;
    }
    if (std::strcmp(mode, "skip") == 0 && argc == 6) {
        g.discard(num(argv[4]));
        unsigned long long n = num(argv[5]);
        for (unsigned long long i = 0; i < n; i++)
            std::printf("%x\n", (unsigned)g());
        return 0;
    }
    if (std::strcmp(mode, "bound") == 0 && argc == 6) {
        unsigned bound = (unsigned)num(argv[4]);
        unsigned long long n = num(argv[5]);
        for (unsigned long long i = 0; i < n; i++)
            std::printf("%x\n", (unsigned)g(bound));
        return 0;
    }
    std::fprintf(stderr, "pcg_ref: bad arguments\n");
    return 2;
}
